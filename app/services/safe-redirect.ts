/**
 * Only same-site paths may be redirect targets: "/x" yes; "//evil", "/\\evil",
 * "https://evil", "javascript:" no. Anything else becomes the fallback.
 */
export function safeRedirect(to: FormDataEntryValue | string | null | undefined, fallback = "/"): string {
  if (typeof to !== "string" || to.length === 0 || to.length > 2000) return fallback;
  if (!to.startsWith("/") || to.startsWith("//") || to.startsWith("/\\")) return fallback;
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f\\]/.test(to)) return fallback;
  try {
    const url = new URL(to, "http://wallcast.invalid");
    if (url.origin !== "http://wallcast.invalid") return fallback;
    return url.pathname + url.search + url.hash;
  } catch {
    return fallback;
  }
}
