/*
Regdrift maps what moves across a PCB production panel onto the coupling of RF
couplers, broadside-coupled striplines and edge-coupled microstrips: the
layer-to-layer misregistration (offset, rotation, scale and skew of each layer)
and the process variation terms (dielectric thickness and permittivity,
finished copper, etched width, mask) at every coupler site. It solves the
cross-section with its own field solver and reports the coupling drift, margin,
yield, error budget and drawing tolerances, fits layer movement to measured
registration targets and recommends artwork scale compensation.

Usage:

	regdrift COMMAND [flags] [arguments]

The commands are:

	demo     run the embedded demo jobs end to end
	map      map the coupling drift of every coupler site on the panel, by source (registration, process)
	sweep    solve a section's cross-section over a range of lateral offsets
	tol      drawing tolerances (registration, dielectric, copper, width) for the target yield, and a trace-width study
	fit      fit each layer's movement (offset, rotation, scale, skew) to measured registration targets
	comp     recommend per-layer artwork scale compensation that maximises the coupler yield
	yield    coupler and part yield across panels, and the error budget
	report   write one self-contained HTML report of a job: maps, plots, tables and inputs
	history  keep lot after lot of fits, chart each construction's movement and recommend the next lot's artwork scale
	version  print the version, module version and VCS revision

Run 'regdrift COMMAND -h' for a command's flags.

Exit status: 0 success (also for -h), 1 a failure while running, 2 bad input
or usage, 3 out of spec (only with --strict), 70 an internal error (a defect,
never bad input), 130, 143 or 129 stopped by SIGINT, SIGTERM or SIGHUP.

Results are engineering estimates: defer to coupon measurements, the
fabricator's qualified process data, the applicable standards and the
customer's drawing.

# demo

Usage:

	regdrift demo [-o DIR]

Run the embedded demo jobs end to end.

Copies the embedded demo jobs into DIR/samples (so that you can edit and rerun
them) and maps each one into DIR/<job>/: a same-core 3 dB hybrid build, the same
hybrids on two cores (which drift more toward the corners), and a panel of
10 dB offset-broadside couplers whose coupling moves linearly with offset.
Then the topology comparison: one 20 dB coupler designed three ways (broadside
on one core, broadside across two cores, edge-coupled microstrip under mask)
on one panel and one process file, mapped and yielded into
DIR/topology-<build>/ and compared side by side, and the microstrip solved
with its base foil as the trace height against its finished copper
(DIR/topology-foil/). All demo data are invented.

# map

Usage:

	regdrift map JOB [-o DIR] [--units mil|um] [--show drift|worst|offset|sigma|margin|window|p|registration|variation|term:NAME] [--width PX] [--strict [--strict-p P]] [--json]

Map the coupling drift of every coupler site on the panel, by source (registration, process).

Computes, for every coupler site of the job, the mean broadside offset that the
registration error model produces there (closed form, linear in the terms), its
standard deviation, and the coupling it gives from the section's solved
coupling-versus-offset curve: drift against the design offset, margin to the
spec limits, the coupling at mean ± 3 sigma, and the probability that the site
is in spec (the closed form yield reports as p_closed).

The headline is the expected number of sites in spec (the sum of those
probabilities) beside the count whose mean offset is in spec; the table gives
both per section with the lowest probability. The ten ringed sites, the
"worst site" line and the worst list of summary.json are the sites least likely
to be in spec (lowest probability, then largest |drift|). Offsets in the table
are from the design offset; summary.json gives offset_m with each section's
design offset included and offset_from_design_m without it.

--show picks the field: drift (the default when all sites share one section),
worst, offset, sigma, margin, p (probability in spec) or window, the share of
the site's allowed offsets that mean ± 3 sigma reaches (1 at the window's
edge), the default when sections differ, whose drifts in dB do not compare
(with [[variation]] terms p is, since the window share sees the offset
alone); each section's bars then have their own width, named in the legend.

--strict exits with status 3 when any site is in spec with a probability below
--strict-p (default 0.9973, the share of a normal distribution within ±3
sigma: every site in spec at three sigma).

Writes map.png (heatmap of the panel), sites.csv (one row per site, with
p_in_spec) and summary.json to the output directory, and a summary table to
stdout.

# sweep

Usage:

	regdrift sweep JOB [--section NAME] [--offsets FROM:TO:STEP] [--accuracy 0.1%] [--sensitivities [--excursions LIST]] [--mesh] [-o DIR] [--json]

Solve a section's cross-section over a range of lateral offsets.

Solves the cross-section of one section of the job (the first by default) at
each lateral offset of the upper trace relative to the lower (design offset
included) and reports the capacitance and inductance matrices, kC and kL,
coupling and directivity at the centre frequency, each line's impedance, the
even and odd impedances of a symmetric pair, and both modes' effective
permittivity. The default offsets are those every command solves the section
over, so that this is the curve map, yield, tol and comp read: at least ±5 mil
about the design offset and as far as any site reaches (its mean offset ± 3
sigma, with a tenth to spare), doubled while the coupling is still in spec at
an end or, with [[variation]] terms, while the offset domain a process
excursion could keep in spec reaches an end within 6 sigma of a site.

Writes sweep.csv and sweep.png (coupling with the spec band and the offsets
where it leaves the spec; impedances; directivity), and section.png
(section-NAME.png when the job has several sections): the cross-section at
the design offset as the field solver meshes it, to check the input at a
glance. Each dielectric of the solved region is shaded and labelled with its
name, kind, thickness and εr; each copper layer with its finished thickness,
its foil and plating steps when given, and the resin beside its traces; the
ground planes, the two traces as their trapezoids with the foot and far-face
widths, the solder mask, and the offset between the trace centres are drawn
and dimensioned. The picture is to scale in both directions, except that a
layer too thin to see is drawn at a stated least height and marked; layers
beyond the grounds, which the solver does not see, are listed. With --mesh
the mesh solved at the design offset is overlaid, at the level the sweep
reached (the coarser of its Richardson pair).

--json also lists every copper layer of the stackup ("copper": layer,
finished_m, and foil_m and plating_m when given as foil plus plating).

With --sensitivities every offset is also solved for the derivative of
coupling, directivity, each line's impedance and each mode's effective
permittivity with respect to every physical parameter of the cross-section:
each dielectric's thickness and εr (by name, or layers[i] when unnamed), each
copper layer's finished thickness, the traces' foot width and etch on each
trace layer, the mask's two thicknesses and εr. sensitivity.csv has one row
per offset and parameter, in dB/mil, ohm/mil and 1/mil for a length (per um
with --units um) and per unit εr for a permittivity, each in its own
column. The table and sensitivity.png rank, at the design offset, the
coupling change each parameter causes over its excursion (first order, for a
rise; a fall reverses the sign): by default ±10 % of a thickness, ±0.1 εr,
±0.5 mil of width and of etch, ±0.3 mil of copper; --excursions changes any
of them, e.g. thickness=5%,er=0.05,width=0.3mil,copper=0.2mil (thickness also
takes a length). An excursion that would make a thickness or width
non-positive (or an εr below 1) is bad input. --json carries the same numbers
(SI: per metre, "per": "m", or per unit εr, "per": "er").

# tol

Usage:

	regdrift tol JOB [--section NAME] [--widen FROM:TO:STEP] [--widen-trace upper|lower] [--target PCT] [-o DIR] [--json]

Drawing tolerances (registration, dielectric, copper, width) for the target yield, and a trace-width study.

For each section (or the one named), finds the lateral offsets at which the
coupling meets the lower and upper spec limits, by root-finding on the solved
coupling curve, and confirms each by a direct field solve at the root (refined
by the secant method on direct solves until the coupling is within 0.0002 dB of
the limit). The symmetric tolerance for the drawing is the smaller distance
from the design offset to the two limits. For two traces on one copper layer
(an edge-coupled pair) the offset is their centre-to-centre spacing, which
layer registration cannot move: the table and tol.json (offset_is "spacing",
gap_m) give it as a spacing (gap) tolerance, not a registration tolerance. The curve is the one map and yield
read (its range doubled, up to four times, while the coupling is still in spec
at an end, or the process domain reaches one); the orientation study uses its allowed offsets, as yield does.

--widen FROM:TO:STEP studies making one trace (the lower by default, see
--widen-trace) wider by each width difference: the tolerance against the
job's spec, the tolerance against the spec window re-centred on the widened
design's own coupling (widening moves the nominal coupling, so the design
would be re-tuned), the coupling at the design offset and each line's
impedance, as a table and tol.png (one plot per section over its own offsets:
the design's curve in bold, the widened family light to dark by width, the
spec band, the legend beside the plot).

Also an orientation study per array: the closed-form mean site yield with
the parts as placed and turned a quarter turn (couplers kept in place; only
the offset across the coupled lines counts).

Drawing notes (notes.txt, "notes" in tol.json, and the table). Each
parameter alone: for the layer-to-layer registration of a broadside pair the
offset tolerance above; for every parameter a [[variation]] term acts on
(others nominal, traces at the design offset) the change at which the
coupling meets each spec limit, first from the sensitivity at the design
offset, then confirmed by direct solves of the perturbed section (the same
secant and 0.0002 dB as the offset roots). All together: a drawing
tolerance bounds the whole deviation from nominal wherever the part sits, so
every deviation is scaled by one factor k (each variation term's panel mean,
across-panel shape and σ; each registration contributor's means, fixed ones
too, spreads and residual grid), found by regula falsi so that the worst
site's P(in spec), the one evaluator's, reaches --target (default 99.73%);
the second-order process term is refitted by direct solves at k until k
settles. k below 1 says how much tighter the process must be, k at or above
1 that it meets the target with room. Each note is then the range the scaled
term covers over the sites, mean ± 3σ, in a drawing's words: "L6–L7
layer-to-layer registration ±0.692 mil", "core KC 36.000 ± 0.646 mil",
"prepreg P2 36.000 +1.409/-1.088 mil" (where a press dome keeps it off
nominal), "etched width on L6 15.800 ± 0.258 mil", "εr of KC 3.480 ± 0.039".
Without variation terms the notes hold the registration line.

# fit

Usage:

	regdrift fit TARGETS.csv [--model affine|similarity|translation] [--robust] [--applied FILE|LAYER:x=S,y=S] [-o DIR] [--contributors FILE] [--json]

Fit each layer's movement (offset, rotation, scale, skew) to measured registration targets.

Reads a measurement file (CSV, units in the header):

	panel,layer,target,x [in],y [in],dx [mil],dy [mil]

with the nominal target positions in the panel frame (origin at the panel
centre, y up, as in the job file; --origin and --flip-y map a machine's frame
into it, and with --panel a target off the panel is refused) and the measured
displacements, or x_meas and
y_meas columns with the measured positions instead of dx and dy. A layer is
measured against the drilled tooling ("L3") or against another layer ("L3-L4",
L3 relative to L4). "-" reads standard input.

For each panel and layer it fits the first-order affine field about the datum
by least squares: six terms (affine), four (similarity: offsets, rotation and
one scale) or two (translation), with standard errors from the residual
variance and the normal matrix. --robust reweights iteratively to find
mis-measured targets: Huber weights, then Tukey's biweight, on each target's
radial residual in units of a robust scale (from the median residual); the
targets beyond 4 sigma are then rejected and the rest refitted by ordinary
least squares, repeated until the set of rejected targets is stable. The
rejected targets are reported as outliers.

Then the lot: the mean and standard deviation of each term over the panels,
per layer, and the pooled residual field (what the affine model leaves) on a
grid. Writes fit.csv (one row per panel and layer), residuals.csv (one row per
target), residual-grid-LAYER.csv (the pooled field, in the format a
contributor's residual = "..." reads) and fit.png (for each layer the targets
on the panel with the measured displacement and the residual after the fit as
exaggerated arrows, outliers ringed). --contributors FILE writes the lot as
TOML [[contributor]] blocks for a job's include = [...] (as measured, the
applied artwork included).

Layers measured against the drilled holes on the same panels share each
panel's drill error. fit keeps that pairing: it prints the per-panel
differences of each such pair ("L3-L4", mean ± sigma, the drill error
cancelled; "differences" in the JSON), and --contributors writes the group
as one table of means per layer plus weighted components of each term's
layer-to-layer covariance over the panels, so that an offset between two of
the layers has the spread of the per-panel differences. A lot of fewer than
five panels is flagged (its sigma is poorly known); one panel gives means only.

--applied gives the artwork scale each measured layer was built with: a CSV
file (layer,scale_x [ppm],scale_y [ppm]) or the compact LAYER:x=+200ppm,y=+180ppm,
repeatable; a layer not named was built at CAD size, and one the targets lack
is bad input. fit then also prints, per layer and axis, the material movement
(the lot mean with the artwork taken out, m = (1+ε)/(1+a) − 1), the setting
that cancels it, 1/(1+m) − 1, and the change from the applied artwork, with
the standard error of the lot mean (σ/√panels); "artwork" in the JSON.

# comp

Usage:

	regdrift comp JOB [--targets TARGETS.csv] [--applied FILE|LAYER:x=S,y=S] [--history DB [--construction KEY]] [--objective yield|worst|rms] [--drill-budget 2mil] [--max 600ppm] [--step 5ppm] [-o DIR] [--json]

Recommend per-layer artwork scale compensation that maximises the coupler yield.

Recommends the artwork scale change of each trace layer, X and Y, from the
artwork the lot was built with, and the new absolute setting (ppm and factor),
from the job's registration model. Every site is judged against its own
section's allowed offset interval (from the solved coupling curve), so a panel
that mixes wide-window hybrids with narrow-window couplers weighs each by its
window. The default objective (--objective yield) maximises the expected site
yield, each site's closed-form probability of being in spec (the rule map and
yield use), by BFGS over the scale differences; site yield rather than good
parts per panel because it is exact in closed form, while a part's yield needs
the joint distribution of its sites (yield's Monte Carlo). --objective worst
minimises the largest share of its window a site uses, (|mean − window centre|
+ 3σ)/half-width (a linear programme); --objective rms the rms of each site's
mean offset from its window's centre over the half-width (least squares).

With --targets, the measurement file is fitted first (as regdrift fit does,
about the job's datum) and each measured layer's lot mean and sigma replace
what the job's contributors say about that layer: the measurement already
holds every source that moves it. Contributors keep acting on the layers that
were not measured (--keep-job-terms adds the measurement instead). A layer in
the targets that the job does not have is skipped with a warning. The
standard error of the recommendation follows from the lot size (σ/√panels of
each measured layer's mean scale); a --step finer than it is flagged.

--applied gives the artwork scale each layer of the lot was built with (a CSV
file layer,scale_x [ppm],scale_y [ppm], or LAYER:x=+200ppm,y=+180ppm,
repeatable). A measured scale already contains it; a layer the job models
gets it added, so that "no change" keeps today's artwork everywhere. The
output gives the material movement, the change and the new setting,
(1 + applied)(1 + change) − 1.

--history DB reads a history database (see regdrift history; --construction
KEY keeps one construction's lots). Without --targets, each trace layer's
scale movement for the next lot is the history's EWMA run-to-run estimate
(the scale table's), with the lot-to-lot σ as its spread and the estimate's
standard error as the recommendation's; the job's scale terms on those layers
are set aside. With --targets, each measured layer's movement (the applied
artwork taken out) is compared with the history's individuals-chart limits
(centre ± 3σ̂ from the average moving range): "inside" or "OUTSIDE" in the
notes, "history" in the JSON.

Only the difference of two layers' compensation across the coupled lines moves
a broadside offset, so the offsets fix the differences and leave a common part
free: among equally good answers comp takes the smallest change from the
applied artwork. --drill-budget (each trace layer's mean registration to the
drilled holes, per axis, at every site) and --max are constraints only: a
budget the answer already keeps changes nothing; one that binds moves the
common part (or, failing that, the differences). comp never recommends a lower
predicted yield than keeping the applied artwork without saying so (a
WARNING in the table, below_applied in the JSON). A relative measurement
(L3-L4) carries no drill registration, and none is shown.

Writes comp.csv (per site, before and after; the misregistration columns
exclude the design offset, which has its own column, as in the table),
comp.png (the mean offset maps before and after, side by side on one colour
scale), compensation.toml (the change as [[contributor]] blocks, to include
in the job and map again) and comp.json.

# yield

Usage:

	regdrift yield JOB [JOB...] [--trials N] [--seed S] [--closed-form] [--turn-gain PCT] [-o DIR] [--json]

Coupler and part yield across panels, and the error budget.

Estimates how many couplers and parts meet their coupling spec across
panel-to-panel variation of the registration error model.

Each section's coupling curve (the one map reads: solved over at least ±5 mil
about the design offset and the sites' mean offsets ± 3 sigma, wider while the
coupling is still in spec at its ends) is inverted
against its spec to give the interval
of allowed offsets (it may be asymmetric about the design offset; if the design
itself is out of spec the interval is empty, a warning is printed and its sites
yield 0). The closed-form site yield is P(offset in interval) for the site's
offset distribution (normal terms and site_sigma exactly; the two widest
uniform terms exactly, any further ones by their variance). The Monte Carlo draws
every term once per panel and site_sigma once per site, and counts good sites,
good parts (every coupler of the part good) and good parts per panel. Runs are
split into fixed blocks of panels, each with its own PCG stream, so the result
for a seed does not depend on --workers.

The error budget gives each contributor term's share of the across-offset
variance (squared sensitivity times variance) at the worst site and averaged
over the panel; its sd column is the standard deviation the term alone causes
(over the panel, the rms over the sites). With [[variation]] terms a coupling
budget follows (in the table, in budget.csv after the offset rows with the
scopes "coupling, ..." and a sd [dB] column, and as budget.png): registration
and variation terms ranked together by their share of the coupling variance.

Writes yield.png (closed-form site yield over the panel for the most common
section and line direction, contours at 99.9, 99 and 95 %, part outlines, each
site's Monte Carlo yield as a bar), parts.png (good parts per panel), yield.csv
(per site p_closed, p_mc and its standard error), budget.csv, budget.png and
yield.json, and a summary table to stdout.

Arrays are named by their name key (a1, a2, ... by position without one) in
part and site names and in the per-array table. An array with product = false
is a coupon strip: its couplers are mapped, simulated and reported per array,
but its parts count in no part yield, good parts per panel or worst parts.

The orientation study turns each array's parts a quarter turn in place and
compares the closed-form mean site yield. It recommends a turn only when the
gain exceeds --turn-gain (default 0.5 %: re-stepping a panel costs more than
one coupler in two hundred) and the Monte Carlo resolution of the array's
mean site yield (twice its standard error, bounded by the mean of the sites'
binomial errors); it says "either" when neither orientation wins by that much.

With several job files, typically thin variants that include one base (the
stackup, sections, parts and error model) and place the arrays differently,
yield compares them: every variant is drawn with the same seed, so variants
that share the error model see the same panels and their differences are
sharper than each figure's own error. One table gives per variant the site
yield, part yield, good parts per panel (with its 5th percentile and the
difference from the first variant), with [[variation]] terms each variant's
term of the largest share of the coupling variance (dominant_term in the
JSON; variants may be different builds of one coupler, each with its own
stackup, sharing a process file), the same per named array, then the
orientation study of every variant; it writes variants.csv, variants.json
(printed with --json) and variants.png (parts lost per panel, per variant and
array). Run yield on one variant for its maps and error budget. --closed-form
skips the Monte Carlo: site yields are then exact, and part yields and good
parts are given as bounds from the site yields alone (the Fréchet bounds
1 − Σ(1 − pᵢ) ≤ P(all sites good) ≤ min pᵢ, whatever the sites' correlation).
--strict exits 3 when any variant's part yield is below 100 % (with
--closed-form: its lower bound).

# report

Usage:

	regdrift report JOB [--targets TARGETS.csv] [-o DIR] [--units mil|um] [--trials N] [--seed S] [--width PX] [--json]

Write one self-contained HTML report of a job: maps, plots, tables and inputs.

Analyses the job as map, sweep, yield and tol do (and, with --targets, as fit
and comp do) and writes report.html, nothing else, to the output directory: a
headline (title, date, version, solver accuracy, expected parts in spec per
panel, the worst section), coupling against offset per section with the spec
band, the panel map with the ten worst sites, the yield and parts maps, the
error budget, the drawing tolerance, the fit and compensation with --targets,
the assumptions and cautions, and the job file with every file it includes,
verbatim. Pictures, styles and a small script are inside the file: it opens
offline in a current browser and prints on A4 or Letter. Pointing at a site
on the panel map shows its name, position, offset, coupling, drift, margin
and probability of being in spec; the search box finds a site by name.
# history

Usage:

	regdrift history add|trend|table|export|import [--db PATH] ...

Keep every lot's registration fits in a database, chart each construction's material movement and recommend the next lot's artwork scale.

The history is one SQLite file: --db PATH, else $REGDRIFT_DB, else
regdrift-history.db in the working directory. Several engineers may add lots
to it at once; each lot is stored whole or not at all.

	regdrift history add TARGETS.csv --lot ID [--date YYYY-MM-DD] --construction FILE|KEY [--applied FILE|LAYER:x=S,y=S] [--robust]

fits the lot as 'regdrift fit' does (the same --model, --robust, --weight and
--datum) and stores each panel's and layer's terms, standard errors, residual
RMS and maximum and the targets set aside. --construction names the build of
each layer: a CSV file "layer,construction,role" (for example "L3,5 mil
high-Tg core 1/1 oz,core top"), or one key for every layer, each layer then
its own role. --applied gives the artwork scale each layer was built with
(a CSV file "layer,scale_x [ppm],scale_y [ppm]", or one layer's
LAYER:x=+200ppm,y=+180ppm; layers not named were built at CAD size). A lot already stored is refused unless --replace.

Sign convention: a scale is positive when a length grows. A layer built with
artwork a that measured ε moved m = (1+ε)/(1+a) − 1 ≈ ε − a; the artwork
that cancels m is s = 1/(1+m) − 1 ≈ −m, a change of s − a. A lot built with
+200 ppm that measured −10 ppm moved −209.96 ppm; the next setting is
+210.00 ppm, a change of +10.00 ppm. Every statistic uses m.

	regdrift history trend [--construction K] [--role R | --layer L] [--term scale_x] [-o DIR]

writes, per construction and role (or the one layer), a control chart
(trend-CONSTRUCTION-ROLE-TERM.png) and its numbers (.csv): one point per lot,
the lot mean with ±1 within-lot standard deviation, an individuals chart with
limits from the average moving range (sigma = MR/1.128), an EWMA (lambda 0.2)
with its time-varying 3-sigma limits, and the lots that break a Western
Electric rule (WE1 one beyond 3 sigma, WE2 two of three beyond 2 sigma, WE3
four of five beyond 1 sigma, WE4 eight in a row on one side) or take the EWMA
beyond its limits.

	regdrift history table [--construction K] [--role R] [-o DIR]

writes scale-table.csv: per construction, role and axis the estimated
movement of the next lot (an EWMA run-to-run estimate, lambda 0.3), the
artwork setting that cancels it in ppm and as a factor, its standard error,
the lots behind it, the last lot and its date, and the chart signals among
the last 10 lots (the process has shifted; the estimate may lag). And
scale-contributors.toml: the movement mean and spread per construction and
role as [[contributor]] blocks a job can include.

	regdrift history export > FILE.csv
	regdrift history import FILE.csv [--replace]

move the history between machines: one CSV row per panel and layer fit, units
in the header; export, import and export again is byte-identical. An import
is stored whole or not at all.

# version

Usage:

	regdrift version

Print the version, module version and VCS revision.
*/
package main
