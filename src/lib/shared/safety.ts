/** The safety caution shown wherever a parameter set is approved or exported (design brief wording). */
export const SAFETY_CAUTION =
  "A parameter set changes where the arm goes. Before production use, load it with safeguards active, run test motions at reduced speed, confirm positions against known references, and keep the previous set ready to restore. Follow your site's safety procedures, the applicable machinery-safety regulations and the instructions of qualified personnel.";
