// Package section solves the cross-section of a coupled pair of printed
// traces and turns it into coupling versus lateral offset.
//
// A [Section] is a stackup (copper and dielectric layers, top to bottom, as on
// a fabrication drawing), two trapezoidal traces, the ground planes (two for
// stripline, one for microstrip with air above), the centre frequency, the
// coupled length and the port reference impedance. [Solve] computes the 2 × 2
// Maxwell capacitance matrices with (C) and without (C0) the dielectrics by
// solving Laplace's equation; [NewLines] derives L = μ0·ε0·C0⁻¹, the coupling
// coefficients, the two modes and the impedances; [Lines.SParams] gives the
// lossless coupled-line 4-port; [Sweep] solves a range of offsets in parallel
// and builds a [Curve] with monotone cubic interpolants that the drift map,
// yield and tolerance commands evaluate millions of times; [CachedSweep] keeps
// curves on disk. [Section.Drawing] and [Section.SweepMesh] hand out the
// geometry and the mesh the solver uses, for a picture to check the input
// against (regdrift sweep's section.png). Everything is SI: metres, F/m,
// H/m, Hz, ohm; coupling in dB.
//
// # Conventions
//
// Offsets are the lateral centre-to-centre offset of the upper trace
// (Traces[0]) relative to the lower one, x_upper − x_lower, design offset
// included. Solving at offset δ keeps the lower trace at Traces[1].X and puts
// the upper one at Traces[1].X + δ. The nominal offset is
// Traces[0].X − Traces[1].X + DesignOffset ([Section.NominalOffset]).
//
// Each copper layer is a slab of its finished thickness; a ground plane fills
// its slab; a trace fills the height of its slab and stands on the face of
// the dielectric it was etched on (the core face when the slab touches one
// core, otherwise the dielectric below), its foot Width wide and its far face
// Width − 2·Etch; the rest of the slab is resin of the dielectric on the far
// side (air for an outer layer). Dielectric thicknesses are measured between
// copper slabs. A copper thickness of 0 is an ideal zero-thickness strip, a
// line of nodes held at the conductor's potential; this is how the tests
// reach Cohn's thin-strip formulas exactly rather than by extrapolating
// thinner and thinner rectangles (a t/b = 1e−3 rectangle of w/b = 1 still
// has 0.26 % more capacitance than the zero-thickness strip; calculated here
// with this solver at accuracy 1e−4). Stripline domains end at the grounds'
// inner faces; microstrip domains are closed by a grounded box
// 160 × (stack height + two trace widths + nominal offset) away (TestOpenBoundary: doubling that
// distance changes C by 7e−5 and C0 by 1.3e−4, mesh change included; the
// geometric grading makes the far box cost a few elements).
//
// # Method, and why
//
// The field is singular at the conductor corners (charge density ∝ r^(−1/3)
// at a right-angle corner, r^(−1/2) at a zero-thickness edge) and quiet
// elsewhere, and every section here is a stack of horizontal layers with two
// trapezoids in it. That shape is known before the solve, so the mesh is
// designed rather than discovered:
//
//   - Bilinear (Q1) isoparametric quadrilaterals on a structured grid. Every
//     dielectric interface and every trace face is a row of nodes; the column
//     lines pass through every trapezoid corner and, inside a trace's slab,
//     follow its sloped sides exactly. Element sizes follow
//     h = min(hmax, h0 + α·distance to the nearest edge or face) — geometric
//     grading toward every singular line, coarse where the field is quiet —
//     and nodes are placed at equal steps of ∫dx/h (grade.go). The level
//     parameter L scales the element counts; the floor h0 shrinks as 1/L, so
//     the elements touching an edge shrink as 1/L² and the corner errors fall
//     as fast as the bulk error (without that the observed order was 1.6, not
//     2).
//   - Every row carries the walls and all four trace edges in one fixed x
//     order, so the columns are vertical: no shear, whatever the offset (an
//     18 mil offset design converges like a centred one). Where an edge of one
//     trace passes an edge of the other (zero offset for equal widths; where
//     the narrow trace's edge crosses the wide one's), the order changes, so
//     the offset axis is covered by several topologies that overlap in
//     transition windows: inside a window each of the two keeps its order by
//     holding the passing edges of the other trace a small gap away (a smooth
//     clamp, in the rows of each trace; the rows between blend), and the
//     capacitances are their smoothstep-weighted mean (topology.go). The
//     topology never changes within one, nodes move smoothly with the offset,
//     and the weights are C¹, so the coupling curve carries no mesh noise
//     (TestSmoothness: the second difference over 0.1 mil steps is 4e−4 dB,
//     which is the curve's physical curvature, and it jitters by at most
//     6e−5 dB, also inside the windows). For a mirror-symmetric section the
//     two topologies of the central window are mirror images, so C11 = C22
//     and C(+δ) = C(−δ) hold to 1e−9. (A first version blended each trace's
//     own two-edge pattern across the gap to keep one topology; its shear
//     grows with offset/gap, and at a 12 mil offset over a 5 mil core it did
//     not converge at all.)
//   - Capacitance from the energy form C_mn = ε0·φ_mᵀ·K·φ_n, whose error is
//     the square of the energy-norm error (second order in h).
//   - Three meshes at levels L/√2, L and 2L and Richardson extrapolation of
//     the last two; the error estimate combines the change between two
//     successive extrapolations with a check of the observed order (see
//     [Solve]). The accuracy setting picks L; if the estimate misses the
//     target, L rises by √2 (at most five steps, then a [ConvergenceError]).
//   - The system is factored by a nested-dissection multifrontal Cholesky
//     (nd.go): the structured grid is cut recursively by node lines along its
//     longer side (George 1973), and each cut is eliminated as a dense front
//     (gonum Potrf, then gonum Dgemv a row at a time for the rest of the
//     front) once its two halves are done (Duff & Reid 1983), with a fused
//     two-right-hand-side solve whose forward half runs as each front is
//     factored. On the 0.05 % fine mesh
//     (14,900 unknowns) that is 2.0e7 multiply-adds per factorisation against
//     8.2e7 for the band Cholesky of the column-by-column numbering (half
//     bandwidth 105, LAPACK dpbtrf through gonum's lapack64, which the first
//     version used and TestNestedDissectionMatchesBand still checks against:
//     potentials agree to 1e−13). Where a subtree of the dissection lies in
//     one dielectric, its fronts with dielectrics are εr times the vacuum
//     ones, so the vacuum system is factored first and those parts are
//     scaled (U = √εr·U0), not refactored: 46 % of the fine-mesh arithmetic
//     of C on the demo section. The front solves run row by row on gonum's
//     assembly axpy and dot. The sweep takes a quarter of the CPU time it
//     took with the band solver. The dissection depends only on the mesh plan and
//     is built once per plan. At 2,000 to 20,000 unknowns a direct solve
//     takes milliseconds, has no iteration count to tune, and its residual
//     (‖K·u − b‖/‖b‖ ≈ 1e−15, checked on every solve; above 1e−8 the solve
//     fails with a [ConvergenceError]) makes a non-converged linear solve
//     impossible rather than merely detected. A preconditioned CG warm-started
//     along the sweep was the alternative; a factorisation does the same work
//     whatever the starting vector, so the warm start has nothing to save, and
//     CG on these graded meshes (element size ratios of 10⁵) would need a
//     strong preconditioner to compete. The sweep runs offsets in parallel on
//     all cores instead, the offsets that solve two topologies first.
//
// Finite differences on such a graded, sloped grid lose the symmetry and the
// variational error bound; a boundary-element method handles the open
// microstrip boundary naturally but needs the layered-media Green's function
// for five dielectrics; an adaptive solver spends its time discovering the
// corners. Here the demo section reaches an extrapolated error of about
// 1e−4 at 4,000 to 7,000 unknowns on the fine mesh (both media, all three
// levels); BenchmarkSolve measures the time per offset.
//
// # Convergence study
//
// The demo section (invented: L2 ground / prepreg 20 mil εr 3.55 / L3
// 1.2 mil / core 5 mil εr 3.00 / L4 1.2 mil / prepreg 20 mil εr 3.55 / L5
// ground; traces 14 mil, 0.6 mil etch) at zero offset, against a solve at
// accuracy 2e−5 (282,392 unknowns, estimated error 2e−7). Single meshes, then
// Richardson triples; errors relative (C12 relative to itself); "band" is the
// half bandwidth of the column-by-column numbering. From TestConvergenceStudy
// (go test -v -run ConvergenceStudy, which also logs the time per level and
// checks the order, the gain of the extrapolation and its convergence):
//
//	level  unknowns  band     C11 pF/m    err C11    err C12  err C0_11        est
//	0.35        192    13    161.14838  +5.32e-02  +5.02e-02  +5.19e-02
//	0.50        414    19    157.67821  +3.05e-02  +2.94e-02  +2.96e-02
//	0.70        884    27    155.35535  +1.53e-02  +1.40e-02  +1.47e-02
//	1.00       2094    43    154.11522  +7.19e-03  +6.43e-03  +6.90e-03
//	1.40       4284    60    153.60391  +3.85e-03  +3.39e-03  +3.69e-03
//	2.00      10029    94    153.29857  +1.85e-03  +1.61e-03  +1.77e-03
//	2.80      21404   137    153.15911  +9.43e-04  +8.18e-04  +9.02e-04
//	Richardson triples (L/√2, L, 2L), extrapolated from L and 2L (unknowns of 2L):
//	0.50       2094    43    152.92755  -5.70e-04  -1.24e-03  -6.58e-04   7.83e-03
//	0.70       4284    60    153.02009  +3.46e-05  -1.58e-04  +2.45e-05   4.08e-04
//	1.00      10029    94    153.02635  +7.55e-05  +8.95e-06  +6.48e-05   2.19e-04
//	1.40      21404   137    153.01085  -2.58e-05  -3.94e-05  -2.61e-05   2.48e-04
//
// (Zero offset lies in a transition window: each level is the weighted mean
// of two topologies.) Single meshes converge as L⁻² (h²; observed order 1.86
// to 2.12 from level 0.5 on); the extrapolation gains 10 to 40 times over
// the finer mesh of its pair. On this
// table the estimate is 2.9 to 10 times the true error (C12's error taken
// relative to √(C11·C22), as the estimate is). Over a wider calibration set
// (the demo section at 0, 2 and 5 mil, two edge-coupled pairs, the offset
// design at 13 and 18 mil; levels 0.6 to 1.2; reference at level 3) the true
// errors at levels 0.7 to 1.2 were 1e−5 to 7e−4, not monotone in the level
// (the element counts, rounded up per segment at each level, make the
// refinement ratio 2 only on average), and the estimate was 0.6 to 48 times
// the true error — mostly conservative, sometimes very, and in the worst case
// 0.5 times (an edge-coupled pair at level 0.6, true error 1.5e−3). It is an
// estimate, not a bound. The default accuracy (0.1 %) starts at level 0.8,
// 0.05 % at level 1.13.
//
// # Published checks
//
// At accuracy 2e−4 (published_test.go; sources in REFERENCES.md): Cohn 1954
// centred thin stripline (10 cases, w/b 0.25 to 3): |error| ≤ 3.9e−5. Cohn
// 1955 edge-coupled (5 cases): ≤ 5.8e−5. Cohn 1960 broadside: ≤ 8.9e−5 for
// w/s ≥ 2; below that the formula's own deviation at s/b = 0.1: Z0e reads
// 0.20 % low at w/s = 1 and 1.35 % low at w/s = 0.5, as an independent
// finite-element solve found (0.21 % and 1.35 %), Z0o within 0.17 %. (At
// s/b = 0.2 this solver finds 0.27 % and 1.73 %, converged to 1e−5, where
// the independent solve listed 0.31 % and 1.77 %; the test does not use
// those.) Hammerstad & Jensen 1980 microstrip at accuracy 1e−3 (15 cases,
// w/h 0.2 to 5, εr 2.2 to 10): Z0 within 8.1e−4, εeff within 2.24e−3, most
// of it the formula's own (at accuracy 2e−4 εeff stays within 2.07e−3).
// Parallel plate plus Cohn's edge fringing for w/b = 20: 2e−6. Pozar §7.6
// coupled-line relations on synthetic and solved sections.
//
// # Line parameters and the 4-port
//
// L = μ0·ε0·C0⁻¹ (Paul, Analysis of Multiconductor Transmission Lines, 2nd
// ed., Wiley 2008, §3.2.4). The modes are the eigenvectors of L·C, computed as
// the symmetric problem R·C·Rᵀ with L = Rᵀ·R (gonum mat.EigenSym), which stays
// well conditioned when the modes are nearly degenerate; with one εr
// everywhere the modes are degenerate ([Lines.Degenerate]) and the basis
// reported is C's eigenvectors, for a symmetric pair the odd then the even
// mode. The 4-port comes from the chain-parameter matrix of the modal
// decomposition (Paul 2008, §6.2, §7.2) with the four ports' terminations
// written into it, one 2 × 2 system that is regular at every length (an
// admittance matrix has poles where a mode is a multiple of a half wave);
// the waves follow from the port voltages (Pozar, Microwave Engineering, 4th
// ed., 2012, §4.3). The peak-coupling frequency is the first maximum of
// |S31| above zero, searched up to twice the higher quarter-wave frequency
// of the two modes. Ports: 1 input (line 1 at z = 0), 2 through (line 1 at z = ℓ),
// 3 coupled (line 2 at z = 0), 4 isolated (line 2 at z = ℓ).
//
// # Limits and faults
//
// [Section.Validate] rejects, as a [FieldError] naming the key, values no
// printed board has: εr above [MaxEr] (100), f0 above [MaxFrequency]
// (1 THz), a thickness, width, etch or coupled length above [MaxDimension]
// (1 m), a reference impedance above 1 kΩ. An accuracy target whose meshes
// exceed the node limit fails at once with a [ConvergenceError] matching
// [ErrMeshLimit]; [FinestAccuracy] gives the finest target a section can
// start at, [MinAccuracy] the finest worth parsing at all. A cache entry is
// checked (format, solver version, key, SHA-256 of the payload, points in
// order, regular file, size) and recomputed when damaged; a cache that
// cannot be written leaves a [CacheWarning] on the curve, never a failed
// solve.
//
// # Speed
//
// The benchmarks measure it (go test -bench . ./panel/section/:
// BenchmarkSweep21 at 0.1 % and 0.05 %, BenchmarkSolve, BenchmarkCoupling);
// the figures are in the README's speed table. A single Solve builds the
// dissections of its meshes; a sweep builds them once for all offsets. The
// 0.05 % sweep meets its 1 s target with the unchanged error estimate, which
// is still conservative by a factor of several there (the true error is
// about 1e−4 at the default level).
//
// BUG(section): the error estimate is not a bound (see above). The microstrip
// box is grounded, not an exact open boundary (error about 1e−4). Losses,
// dispersion and surface roughness are not modelled (quasi-static, lossless).
// Solder mask is not modelled (add it as a dielectric layer above the outer
// copper).
package section
