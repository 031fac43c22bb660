/** Days before the due date from which a pull shows as "due" [common practice]. */
export const DUE_SOON_DAYS = 14;
