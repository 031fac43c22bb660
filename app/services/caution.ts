/**
 * The engineering caution: the same words wherever a grade or a decision number appears
 * (screens, reports, e-mails). Pure, shared by the component kit and the e-mails.
 */
export const CAUTION_LEAD = "Decision support only.";
export const CAUTION_BODY =
  "Results must be reviewed by a qualified engineer or authorised piping inspector; local codes, jurisdictional rules and the owner's own procedures govern.";
export const CAUTION = `${CAUTION_LEAD} ${CAUTION_BODY}`;
