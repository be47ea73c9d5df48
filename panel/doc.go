// Package panel describes a production panel and the coupler sites on it: the
// panel outline, its border (the frame where no part may go) and the registration
// datum; parts with their couplers in part-local coordinates; step-and-repeat
// arrays of parts; and the expansion of all of these into sites in panel
// coordinates.
//
// Frame: origin at the panel centre, x along the first size value, y along the
// second, y up, angles counter-clockwise from +x, all lengths in metres and
// angles in radians. A coupler's angle is the direction along which its coupled
// lines run; the broadside offset is measured across it.
//
// The cross-section that sits at a site lives in the sub-package section.
package panel
