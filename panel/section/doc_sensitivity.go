// Package-documentation text on finished copper, the solder mask and the
// sensitivities, kept apart from doc.go until it is merged there. It holds
// only comments.
//
// # Finished copper
//
// A copper layer's Thickness is its finished thickness, the one the solver
// uses; Layer.Foil and Layer.Plating record how it was built (base foil, then
// each plating step: panel plate, pattern plate, cap plate), and when given
// they must add up to it (FinishedThickness). A foil weight in ounces per
// square foot converts at 1 oz/ft² = 28.349523125 g / 0.09290304 m² =
// 305.1517 g/m² (exact) and the handbook density of copper, 8.96 g/cm³:
// OzThickness = 34.057 µm = 1.3408 mil per ounce (CopperWeightThickness).
// A variation of one plating step moves the finished thickness alike, so its
// sensitivity is the layer's ParamCopper.
//
// # Solder mask
//
// Stackup.Mask coats the outer copper of a microstrip: a slab OverLaminate
// thick on the bare laminate, and OverCopper thick on each trace's far face
// and, measured horizontally, on its side walls (square outer corners; the
// union where they overlap). The mesh follows every face of the coat at
// every offset as it follows the traces: the coat's top faces are node rows,
// and in every row the outer faces of the side-wall coats are column lines
// beside the trace edges (keysOrdered), so no element straddles mask and air.
// The coat's faces are not graded toward as copper edges are (a dielectric
// face puts a kink in the potential, not a singularity): the grading runs
// on from the copper edge behind each face (meshPlan.segSing), and a thin
// coat does not lower the mesh floor. Faces within 1 nm of another row share
// it.
// A mask on a stripline is a FieldError; so is a mask whose side-wall coats
// would meet across an edge-coupled gap, and one over a broadside pair with a
// trace on the outer layer (not modelled: its coat columns would need their
// own crossing topologies).
//
// # Sensitivities
//
// With Settings.Sensitivities every Point carries, for each parameter of
// Section.Params (each dielectric's thickness and εr, each copper layer's
// finished thickness, the width and etch of the traces on each copper layer,
// the mask's two thicknesses and εr), the derivative of C and C0 and of
// coupling, directivity, each line's impedance, each mode's εeff and, for a
// symmetric pair, Z0e and Z0o, per metre or per unit εr, at the curve's fixed
// coupled length. They are cached with the curve.
//
// Method. The capacitance is a quadratic form at a stationary point:
// C_mn = ε0·φ_mᵀ·K·φ_n where K·φ vanishes on the free nodes. Any change of K
// then changes C, to first order, by ε0·φ_mᵀ·δK·φ_n alone — the change of φ
// contributes nothing (the potentials are their own adjoints). So no
// derivative needs a new solve:
//
//   - εr of a region: δK is the region's stiffness, and dC_mn/dεr is ε0 times
//     the field energy in that region (resin in a copper slab counts to the
//     dielectric it comes from, Section.buildGeometry). One pass over the
//     elements gives all of them.
//   - A length (a thickness, a width, an etch, a coat): the mesh moves with
//     the interface — the same element counts in every segment, the nodes
//     where the moved geometry puts them (perturbedPlan) — and dK/dp is the
//     derivative of the element matrices under that node motion, taken as a
//     forward difference over 1e−6 of the smallest feature (error about
//     1e−6). Elements that only translate contribute nothing and are skipped;
//     the cost per parameter is one mesh realisation and the element
//     matrices of the deformed elements, no factorisation.
//
// This is the discrete shape derivative, exact for the mesh family; the
// derivatives at the two finer levels are Richardson-extrapolated like C.
// In a transition window the weight of the two topologies moves with the
// geometry too; that term, (C_b − C_a)·dt/dp, is of the size of the
// discretisation error and is left out. The adjoint route would give nothing
// more: for the energy form the adjoint solutions are the potentials
// already computed, which is what makes all parameters cost less than one
// more solve; an adjoint for coupling itself reduces to this through the
// chain rule on the 2 × 2 matrices.
//
// The outer derivatives — coupling, directivity, impedances, εeff — follow
// from dC and dC0 by central differences of the closed-form line and 4-port
// functions (NewLines, the S-parameters) along (dC, dC0), over a relative
// change of 1e−5 of C: truncation about 1e−10, rounding about 1e−11, and no
// field solve.
//
// Central differences of converged solves were the alternative: two more
// sweeps per parameter (25 sweeps for the 12 parameters of the demo section),
// and noisy, since the element counts change with the geometry and each
// differenced solve carries its own discretisation error (at accuracy 2e−4
// the difference quotient for the mask's coat was 1.2 % off over a 0.1 mil
// step, while the shape derivative moved by 2.3e−4 between accuracies 2e−4
// and 5e−5). They are the tests' reference instead.
//
// Agreement (sens_test.go, sensfd_test.go): a homogeneous dielectric's
// region energies add up to C/εr to 1e−12; a w = 20b strip gives dC/dw =
// 4ε/b within 1.8e−5 and dC/dh = −ε·w/h² within 3e−6; Cohn 1954 dZ0/dw and
// dZ0/db within 6.5e−5 (w/b 0.3 to 2.5); Cohn 1955 dZ0e/ds and dZ0o/ds within
// 9.9e−5; Hammerstad & Jensen dZ0/dw and dZ0/dh within 2.0e−3 (w/h 0.5 to 4);
// against central differences of converged solves over six sections
// (broadside at 0 and 2 mil, an offset broadside design, edge-coupled
// stripline and microstrip, with a mask), every derivative of coupling,
// line and even/odd impedances and εeff within 1 % plus 2e−4 dB (1.2e−3 Ω,
// 1e−4 of εeff) per mil or per unit εr: of 298 comparisons the median
// relative deviation is 3.6e−4 and the 90th percentile 1.9e−3; above 1 %
// are only two small derivatives inside their floors (a line impedance's
// 0.18 Ω/mil, 1.2 %; the coupling's −3.0e−4 dB/mil to the etch of a centred
// broadside pair, 5 %, 1.6e−5 dB/mil).
//
// Mirror. The mirror x → −x maps the section at offset δ onto itself at −δ,
// so a sweep solves only |δ| (a centred ±10 mil sweep solves 11 offsets, not
// 21); the curve is exactly even in the offset.
//
// Refinement. When a sweep misses its target the next level follows from
// the estimate (nextLevel: level·(est/acc)^(1/6), between 1.1× and √2×)
// rather than always √2×, so a near miss costs a small step: the demo
// section's ±10 mil sweep at 0.06 % misses at its start level and now
// finishes at 15,519 unknowns (2.0 s CPU for the whole process) where the √2
// ladder went to 27,420 (3.4 s CPU).
//
// Speed, on the shared 2-core machine at load 6 to 16 (other helpers'
// builds; CPU time is the steadier figure), go test -run XXX -bench
// 'Sensitivities21|Mask|SweepWide' -benchtime 3x -count 3 ./panel/section/:
//
//	BenchmarkSensitivities21/plain   237 to 395 ms CPU, 0.28 to 1.1 s wall (11 of 21 offsets solved)
//	BenchmarkSensitivities21/sens    455 to 736 ms CPU, 0.95 to 2.05 s wall, 12 parameters: 1.8 to 2.1× plain
//	BenchmarkMask/bare               534 to 592 ms CPU, 6,878 unknowns (edge-coupled microstrip, 2 refinement steps)
//	BenchmarkMask/mask               826 to 1148 ms CPU, 9,792 unknowns: 1.4 to 2.1× bare (unknowns 1.42×)
//	BenchmarkSweepWide (±10 mil, 0.05 %)  550 to 683 ms CPU, 15,512 unknowns, 1 step
//
// The sensitivities cost about one more plain sweep whatever their number:
// per parameter and mesh, one placement of the moved nodes and the matrices
// of the deformed elements (profile: 44 % of the time in the derivatives,
// of which half is placing the nodes). The whole process `regdrift sweep
// samples/same-core.toml --offsets -10mil:10mil:1mil --accuracy 0.05%
// --no-cache` takes 0.78 to 0.86 s CPU (1.03 to 1.05 s before the mirror).

package section
