/**
 * A route's `headers` export for pages that may answer 429: React Router keeps only the
 * cookies of a route's own headers unless the route says otherwise, so this passes the
 * Retry-After of a rate limit (thrown or returned) on to the document.
 *   export { keepRetryAfter as headers } from "~/services/retry-after";
 */
type HeadersArgs = {
  parentHeaders: Headers;
  loaderHeaders: Headers;
  actionHeaders: Headers;
  errorHeaders: Headers | undefined;
};

export function keepRetryAfter({ parentHeaders, loaderHeaders, actionHeaders, errorHeaders }: HeadersArgs): Headers {
  const headers = new Headers(parentHeaders);
  const retryAfter = [errorHeaders, actionHeaders, loaderHeaders]
    .map((h) => h?.get("Retry-After"))
    .find((v): v is string => Boolean(v));
  if (retryAfter) headers.set("Retry-After", retryAfter);
  return headers;
}
