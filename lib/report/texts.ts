// Fixed wording of the reports: the estimate notice, the conditions the figures hold under, the
// definitions of the figures and the safety notes. Plain English; standards' terms where they exist.

export const ESTIMATE_NOTICE =
  'Camera-based estimate. These figures were measured from photographs, not with a calibrated ' +
  'photometer or colorimeter. They are fit for comparing areas of one panel and panels of one lot ' +
  'taken the same way; read them with the cautions at the end of this report.';

export const ESTIMATE_DETAIL = [
  'A consumer camera is not a luminance meter. Its pixel values were turned back into linear light ' +
    'with an assumed or measured tone curve, corrected for lens falloff, and compared with each other. ' +
    'Luminance is therefore given relative to the centre grid point unless an absolute calibration ' +
    'against a reference meter is recorded on the Method page.',
  "Colour figures (u', v' and Δu'v') compare points within one photo. A camera's colour filters do " +
    'not match the CIE colour-matching functions, so absolute chromaticity from a camera is approximate ' +
    'and differences between photos with different white balance are not meaningful.',
  'SEMU (the SEMI D31 mura index) is defined for flat panels of roughly 8 to 30 inch diagonal on ' +
    'light fields; on black or dim fields, and for much larger or smaller panels, it is an extrapolation.',
  'Where this report and a measurement with a calibrated instrument disagree, the instrument governs.',
];

export const CONDITIONS = [
  'The room was dark (about 1 lux or less at the switched-off screen) and nothing bright was reflected in the panel.',
  'The panel had warmed up (at least 15 to 30 minutes on) and showed the test field full screen, with the picture settings it is judged at.',
  'The camera was on the panel\u2019s centre normal, far enough away that the corners were seen within about 10\u00b0 of it; ' +
    'liquid-crystal panels change luminance and colour with viewing angle.',
  'Exposure, focus, white balance and aperture were fixed by hand; automatic HDR, local tone mapping and beauty filters were off.',
  'No part of the panel was clipped, and dark fields were well above the camera\u2019s noise floor.',
  'The falloff correction was made for the same camera, lens, focal length, aperture and focus distance as the photos.',
  'Sizes in mm and SEMU assume the active-area size recorded on the Method page.',
];

export const DEFINITIONS = [
  'Relative luminance: mean linear luminance Y over a grid spot divided by that of the centre point.',
  'Non-uniformity = 100 \u00d7 (Lmax \u2212 Lmin) / Lmax over the grid points; uniformity = 100 \u00d7 Lmin / Lmax; ' +
    'white variation \u03b4W = Lmax / Lmin; deviation from centre = 100 \u00d7 (Li \u2212 Lc) / Lc.',
  "u', v': CIE 1976 UCS chromaticity. \u0394u'v' = \u221a(\u0394u'\u00b2 + \u0394v'\u00b2), from the centre point or between any two points.",
  'Contrast of a mura = 100 \u00d7 (mean L in the mura \u2212 mean L of the fitted background) / mean L of the background, in %.',
  'SEMU = |contrast| / Cjnd with Cjnd = 1.97 / S^0.33 + 0.72 (%), S = mura area in mm\u00b2 on the panel; 1 SEMU is just noticeable.',
  'Margin: how far a figure is inside its limit, in the figure\u2019s own unit; negative means the limit was exceeded.',
];

export const SAFETY_INTRO =
  'The photographs for this report are taken of a closed display in normal use. If a display has to be ' +
  'opened (for example to confirm a cause of mura), that is work for qualified people only, following ' +
  'the local electrical codes, the maker\u2019s service documentation and licensed practice. The notes below ' +
  'are reminders, not instructions, and do not replace them.';

export const SAFETY = [
  'Mains voltage: the power supply inside a display is connected to the mains. Unplug the display and ' +
    'make sure it cannot be switched back on before opening it.',
  'Stored charge: power-supply capacitors (rated for a few hundred volts) can stay charged for hours or ' +
    'days after unplugging. Treat them as live until they have been discharged and checked with a meter.',
  'Backlight drivers: fluorescent (CCFL) backlight inverters run at around a kilovolt AC and more at ' +
    'start-up; LED backlight strings run on boosted DC of the order of 200 V. Fluorescent tubes contain mercury.',
  'Electrostatic discharge: panel electronics are easily damaged; use a grounded wrist strap and mat.',
  'Glass: cracked panels have sharp edges, and large panels can break when lifted by one edge. ' +
    'Wear cut-resistant gloves and lift large panels with two people, keeping them flat.',
];
