const uuidPattern = /^[0-9a-f]{8}-[0-9a-f]{4}-[1-8][0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$/i;

/** A well-formed record id (malformed ids are a 404, never a database error). Pure. */
export const isUuid = (value: unknown): value is string => typeof value === "string" && uuidPattern.test(value);
