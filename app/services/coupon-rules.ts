/** Days before the due date from which a pull shows as "due" [common practice]. */
export const DUE_SOON_DAYS = 14;

/**
 * The one definition of "due", in the words every screen uses: a pull falls due on the
 * day the point's planned exposure ends; the schedule lists it as due from DUE_SOON_DAYS
 * before that day, and as overdue after it.
 */
export const DUE_RULE = `A pull falls due on the day the point's planned exposure ends; it shows as due from ${DUE_SOON_DAYS} days before that day, and as overdue after it.`;
