/** Small HTML helpers shared by the pages of the local services (sign-in picker, inbox). */

export function escapeHtml(value: unknown): string {
  return String(value ?? "")
    .replace(/&/g, "&amp;")
    .replace(/</g, "&lt;")
    .replace(/>/g, "&gt;")
    .replace(/"/g, "&quot;")
    .replace(/'/g, "&#39;");
}

const baseCss = `
:root {
  color-scheme: light;
  --ink: #1d2a33; --muted: #5a6872; --line: #d5dde2; --panel: #ffffff; --page: #f2f5f6;
  --accent: #1f6f78; --accent-ink: #ffffff; --accent-soft: #e3f0f1; --danger: #a3322b;
  --focus: #f0a202;
}
* { box-sizing: border-box; }
html { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
  font-size: 16px; line-height: 1.45; color: var(--ink); background: var(--page); }
body { margin: 0; }
a { color: var(--accent); }
:focus-visible { outline: 3px solid var(--focus); outline-offset: 2px; }
.band { background: var(--ink); color: #fff; padding: 0.6rem 1.25rem; font-size: 0.85rem; letter-spacing: 0.02em; }
.band strong { font-weight: 600; }
main { max-width: 46rem; margin: 2rem auto; padding: 0 1rem; }
h1 { font-size: 1.5rem; margin: 0 0 0.25rem; }
h2 { font-size: 1.05rem; margin: 1.75rem 0 0.5rem; }
p.lead { margin: 0 0 1.25rem; color: var(--muted); }
.card { background: var(--panel); border: 1px solid var(--line); border-radius: 10px; padding: 1.25rem; }
.alert { border: 1px solid var(--danger); color: var(--danger); background: #fbeeed; border-radius: 8px;
  padding: 0.6rem 0.8rem; margin: 0 0 1rem; }
label { display: block; font-weight: 600; margin-bottom: 0.3rem; }
input[type=email] { width: 100%; font: inherit; padding: 0.55rem 0.65rem; border: 1px solid #9aa8b1;
  border-radius: 6px; background: #fff; color: var(--ink); }
.hint { color: var(--muted); font-size: 0.875rem; margin: 0.3rem 0 0; }
.btn { font: inherit; font-weight: 600; border: 1px solid var(--accent); background: var(--accent);
  color: var(--accent-ink); border-radius: 6px; padding: 0.5rem 1rem; cursor: pointer; text-decoration: none;
  display: inline-block; }
.btn.secondary { background: #fff; color: var(--accent); }
.btn:hover { filter: brightness(1.08); }
.muted { color: var(--muted); }
.mono { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 0.875rem; }
`;

export function renderPage(opts: { title: string; band: string; body: string; extraCss?: string }): string {
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(opts.title)}</title>
<link rel="icon" href="data:,">
<style>${baseCss}${opts.extraCss ?? ""}</style>
</head>
<body>
<div class="band" role="note"><strong>Wallcast local services</strong> · ${escapeHtml(opts.band)}</div>
${opts.body}
</body>
</html>
`;
}
