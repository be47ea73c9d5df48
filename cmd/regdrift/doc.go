/*
Regdrift maps layer-to-layer misregistration across a PCB production panel onto
the coupling of broadside-coupled stripline couplers: the broadside offset at
every coupler site, the coupling drift it causes, yield, error budget, the
offset tolerance for the fabrication drawing, and artwork scale compensation
from measured registration targets.

Usage:

	regdrift COMMAND [flags] [arguments]

The commands are:

	demo     run the embedded demo jobs end to end
	map      map the broadside offset and coupling drift of every coupler site on the panel
	sweep    solve a section's cross-section over a range of lateral offsets
	tol      layer-to-layer offset tolerance for the fabrication drawing, and a trace-width study
	fit      fit each layer's movement (offset, rotation, scale, skew) to measured registration targets
	comp     recommend per-layer artwork scale compensation that minimises the broadside offsets
	yield    coupler and part yield across panels, and the error budget
	report   write one self-contained HTML report of a job: maps, plots, tables and inputs
	history  keep lot after lot of fits, chart each construction's movement and recommend the next lot's artwork scale
	version  print the version, module version and VCS revision

Run 'regdrift COMMAND -h' for a command's flags.

Exit status: 0 success (also for -h), 1 a failure while running, 2 bad input
or usage, 3 out of spec (only with --strict).

Results are engineering estimates: check them against coupon measurements and
the fabricator's qualified process data.

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

	regdrift map JOB [-o DIR] [--units mil|um] [--show drift|worst|offset|sigma|margin|registration|variation|term:NAME] [--width PX] [--json]

Map the broadside offset and coupling drift of every coupler site on the panel.

Computes, for every coupler site of the job, the mean broadside offset that the
registration error model produces there (closed form, linear in the terms), its
standard deviation, and the coupling it gives from the section's solved
coupling-versus-offset curve: drift against the design offset, margin to the
spec limits, and the coupling at mean ± 3 sigma.

Writes map.png (heatmap of the panel), sites.csv (one row per site) and
summary.json to the output directory, and a summary table to stdout.

# sweep

Usage:

	regdrift sweep JOB [--section NAME] [--offsets FROM:TO:STEP] [--accuracy 0.1%] [--sensitivities [--excursions LIST]] [-o DIR] [--json]

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
an end.

Writes sweep.csv and sweep.png (coupling with the spec band and the offsets
where it leaves the spec; impedances; directivity).

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

	regdrift tol JOB [--section NAME] [--widen FROM:TO:STEP] [--widen-trace upper|lower] [-o DIR] [--json]

Layer-to-layer offset tolerance for the fabrication drawing, and a trace-width study.

For each section (or the one named), finds the lateral offsets at which the
coupling meets the lower and upper spec limits, by root-finding on the solved
coupling curve, and confirms each by a direct field solve at the root (refined
by the secant method on direct solves until the coupling is within 0.0002 dB of
the limit). The symmetric tolerance for the drawing is the smaller distance
from the design offset to the two limits. The curve is the one map and yield
read (its range doubled, up to four times, while the coupling is still in spec
at an end); the orientation study uses its allowed offsets, as yield does.

--widen FROM:TO:STEP studies making one trace (the lower by default, see
--widen-trace) wider by each width difference: the tolerance against the
job's spec, the tolerance against the spec window re-centred on the widened
design's own coupling (widening moves the nominal coupling, so the design
would be re-tuned), the coupling at the design offset and each line's
impedance, as a table and tol.png (the family of coupling curves with the spec
band).

Also an orientation study per array: the closed-form mean site yield with
the parts as placed and turned a quarter turn (couplers kept in place; only
the offset across the coupled lines counts).

# fit

Usage:

	regdrift fit TARGETS.csv [--model affine|similarity|translation] [--robust] [-o DIR] [--contributors FILE] [--json]

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
TOML [[contributor]] blocks for a job's include = [...].

# comp

Usage:

	regdrift comp JOB [--targets TARGETS.csv] [--objective worst|rms] [--drill-budget 2mil] [--max 600ppm] [--step 5ppm] [-o DIR] [--json]

Recommend per-layer artwork scale compensation that minimises the broadside offsets.

Recommends the artwork scale compensation of each trace layer, X and Y, in ppm
and as a factor, from the job's registration model: the compensation that
minimises the worst broadside offset over all sites (--objective worst, a
linear programme) or its root mean square (--objective rms, least squares).

With --targets, the measurement file is fitted first (as regdrift fit does,
about the job's datum) and each measured layer's lot mean and sigma replace
what the job's contributors say about that layer: the measurement already
holds every source that moves it. Contributors keep acting on the layers that
were not measured (--keep-job-terms adds the measurement instead). A layer in
the targets that the job does not have is skipped with a warning.

Only the difference of two layers' compensation across the coupled lines moves
a broadside offset, so the offsets fix the differences and leave a common part
free. With --drill-budget the common part keeps every trace layer's mean
registration to the drilled holes within the budget (per axis, at every site)
and as small as possible; without it the common part is the smallest
compensation. The output says which. The compensation is what the artwork is
scaled by before the material moves: a layer whose material shrinks by ε is
compensated fully by the factor 1/(1+ε).

Writes comp.csv (per site, before and after), comp.png (the mean offset maps
before and after, side by side on one colour scale), compensation.toml (the
recommendation as [[contributor]] blocks, to include in the job and map again)
and comp.json. Sites in spec and the predicted site yield use the section's
solved coupling curve, as map and yield do.

# yield

Usage:

	regdrift yield JOB [--trials N] [--seed S] [-o DIR] [--json]

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
(over the panel, the rms over the sites).

Writes yield.png (closed-form site yield over the panel for the most common
section and line direction, contours at 99.9, 99 and 95 %, part outlines, each
site's Monte Carlo yield as a bar), parts.png (good parts per panel), yield.csv
(per site p_closed, p_mc and its standard error), budget.csv, budget.png and
yield.json, and a summary table to stdout.

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

	regdrift history add TARGETS.csv --lot ID [--date YYYY-MM-DD] --construction FILE|KEY [--applied FILE] [--robust]

fits the lot as 'regdrift fit' does (the same --model, --robust, --weight and
--datum) and stores each panel's and layer's terms, standard errors, residual
RMS and maximum and the targets set aside. --construction names the build of
each layer: a CSV file "layer,construction,role" (for example "L3,5 mil
high-Tg core 1/1 oz,core top"), or one key for every layer, each layer then
its own role. --applied gives the artwork scale each layer was built with
("layer,scale_x [ppm],scale_y [ppm]"; layers not named were built at CAD
size). A lot already stored is refused unless --replace.

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
