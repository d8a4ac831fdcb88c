/* palette: the verdict colours every picture shares — the operator screen
 * and the overlay written as evidence — so a verdict looks the same on the
 * bench and in the audit.
 *
 * From Okabe & Ito (2008), "Color Universal Design", whose palette stays
 * distinguishable under the common colour-vision deficiencies.  A verdict
 * is never told by colour alone: its word (and on the screen its symbol)
 * goes with it.  Ink on these colours is black: WCAG 2.1's contrast ratio
 * of black on each is 5.4:1 or more (tests/station/test_screen.c and
 * tests/ref/test_overlay.py compute it).  Values only; no code. */
#ifndef ST_PALETTE_H
#define ST_PALETTE_H

#define PALETTE_GREEN {0, 158, 115}      /* bluish green: PASS */
#define PALETTE_VERMILION {213, 94, 0}   /* FAIL, over a limit */
#define PALETTE_YELLOW {240, 228, 66}    /* NO VERDICT */
#define PALETTE_PURPLE {204, 121, 167}   /* reddish purple: inspection halted */
#define PALETTE_ORANGE {230, 159, 0}     /* camera lost */
#define PALETTE_SKY {86, 180, 233}       /* within limits, the field typed into */
#define PALETTE_INK {0, 0, 0}            /* text on any of the above */

#endif
