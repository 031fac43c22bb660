/**
 * Local stand-in for the Resend e-mail API, reached by the app through the real `resend`
 * SDK (`new Resend(key, { baseUrl: mailUrl })` or `RESEND_BASE_URL=mailUrl`).
 *
 * API (JSON; errors in Resend's shape `{ statusCode, name, message }`):
 *   POST   /emails          send one message (Bearer key required, any non-empty key) → 200 { id }
 *   POST   /emails/batch    send up to 100 messages at once → 200 { data: [{ id }, …] }
 *   GET    /emails          → { object: "list", has_more: false, data: [...] } newest first;
 *                             optional ?to=<address> (matches to, cc and bcc) and ?limit=<n>
 *   GET    /emails/:id      → the stored message, or 404
 *   DELETE /emails          clears the inbox (memory and file) → { deleted: n }
 *   POST   /_fail-next      test hook: { count?: n = 1, status?: 400–599 = 500, message? } makes
 *                             the next n send requests fail with that status
 * Pages:
 *   GET    /                the inbox; `/?id=<id>` shows one message (HTML body in a sandboxed
 *                             iframe, then the text body)
 *
 * Messages are kept in memory and appended to `<dataDir>/mail.jsonl`, which is read back at
 * start, so the inbox survives restarts. Nothing is ever delivered anywhere.
 */
import { randomUUID, createHash } from "node:crypto";
import { appendFile, mkdir, readFile, writeFile } from "node:fs/promises";
import { createServer, type Server } from "node:http";
import type { AddressInfo } from "node:net";
import path from "node:path";
import express, { type NextFunction, type Request, type Response } from "express";
import { escapeHtml, renderPage } from "./html.ts";
import { closeServer, hostForUrl, listen, logRequests } from "./http-util.ts";

export interface MailOptions {
  host: string;
  port: number;
  dataDir: string;
  log?: (line: string) => void;
}

export interface MailHandle {
  url: string;
  server: Server;
  stop(): Promise<void>;
}

export interface StoredAttachment {
  filename: string | null;
  content_type: string | null;
  size: number | null;
}

export interface StoredEmail {
  object: "email";
  id: string;
  created_at: string;
  from: string;
  to: string[];
  cc: string[] | null;
  bcc: string[] | null;
  reply_to: string[] | null;
  subject: string;
  html: string | null;
  text: string | null;
  tags: Array<{ name: string; value: string }> | null;
  headers: Record<string, string> | null;
  attachments: StoredAttachment[] | null;
  scheduled_at: string | null;
  last_event: "delivered";
}

interface ResendError {
  statusCode: number;
  name: string;
  message: string;
}

class ApiError extends Error {
  constructor(
    readonly statusCode: number,
    readonly errorName: string,
    message: string,
  ) {
    super(message);
  }
  toJSON(): ResendError {
    return { statusCode: this.statusCode, name: this.errorName, message: this.message };
  }
}

const MAX_RECIPIENTS = 50;
const MAX_BATCH = 100;
const IDEMPOTENCY_TTL_MS = 24 * 60 * 60 * 1000;

function nameForStatus(status: number): string {
  if (status === 401) return "missing_api_key";
  if (status === 403) return "invalid_api_key";
  if (status === 404) return "not_found";
  if (status === 409) return "invalid_idempotent_request";
  if (status === 422) return "validation_error";
  if (status === 429) return "rate_limit_exceeded";
  if (status >= 500) return "application_error";
  return "validation_error";
}

function addressList(value: unknown, field: string, required: boolean): string[] | null {
  if (value === undefined || value === null) {
    if (required) throw new ApiError(422, "missing_required_field", `Missing \`${field}\` field.`);
    return null;
  }
  const list = typeof value === "string" ? [value] : value;
  if (!Array.isArray(list) || list.some((v) => typeof v !== "string" || v.trim() === "")) {
    throw new ApiError(422, "validation_error", `The \`${field}\` field must be a string or an array of strings.`);
  }
  if (required && list.length === 0) throw new ApiError(422, "missing_required_field", `Missing \`${field}\` field.`);
  if (list.length > MAX_RECIPIENTS) {
    throw new ApiError(422, "validation_error", `The \`${field}\` field accepts at most ${MAX_RECIPIENTS} addresses.`);
  }
  return (list as string[]).map((v) => v.trim());
}

function optionalString(value: unknown, field: string): string | null {
  if (value === undefined || value === null) return null;
  if (typeof value !== "string")
    throw new ApiError(422, "validation_error", `The \`${field}\` field must be a string.`);
  return value;
}

function parseTags(value: unknown): StoredEmail["tags"] {
  if (value === undefined || value === null) return null;
  if (!Array.isArray(value)) throw new ApiError(422, "validation_error", "The `tags` field must be an array.");
  return value.map((tag: unknown) => {
    const t = tag as { name?: unknown; value?: unknown } | null;
    const ok = (v: unknown) => typeof v === "string" && /^[A-Za-z0-9_-]{1,256}$/.test(v);
    if (!t || !ok(t.name) || !ok(t.value)) {
      throw new ApiError(
        422,
        "validation_error",
        "Each tag needs a `name` and a `value` of ASCII letters, digits, underscores or dashes.",
      );
    }
    return { name: t.name as string, value: t.value as string };
  });
}

function parseHeaders(value: unknown): Record<string, string> | null {
  if (value === undefined || value === null) return null;
  if (typeof value !== "object" || Array.isArray(value)) {
    throw new ApiError(422, "validation_error", "The `headers` field must be an object.");
  }
  const out: Record<string, string> = {};
  for (const [k, v] of Object.entries(value as Record<string, unknown>)) out[k] = String(v);
  return out;
}

function parseAttachments(value: unknown): StoredAttachment[] | null {
  if (value === undefined || value === null) return null;
  if (!Array.isArray(value)) throw new ApiError(422, "validation_error", "The `attachments` field must be an array.");
  return value.map((a: unknown) => {
    const att = (a ?? {}) as { filename?: unknown; content_type?: unknown; content?: unknown };
    let size: number | null = null;
    if (typeof att.content === "string") size = Buffer.from(att.content, "base64").length;
    else if (Array.isArray(att.content)) size = att.content.length;
    return {
      filename: typeof att.filename === "string" ? att.filename : null,
      content_type: typeof att.content_type === "string" ? att.content_type : null,
      size,
    };
  });
}

/** Validates one message as the Resend API would and turns it into what the inbox stores. */
function toStoredEmail(input: unknown): StoredEmail {
  if (!input || typeof input !== "object" || Array.isArray(input)) {
    throw new ApiError(422, "validation_error", "The request body must be a JSON object.");
  }
  const body = input as Record<string, unknown>;
  const from = optionalString(body["from"], "from");
  if (!from || from.trim() === "") throw new ApiError(422, "missing_required_field", "Missing `from` field.");
  const to = addressList(body["to"], "to", true) as string[];
  const subject = optionalString(body["subject"], "subject");
  if (subject === null || subject.trim() === "") {
    throw new ApiError(422, "missing_required_field", "Missing `subject` field.");
  }
  return {
    object: "email",
    id: randomUUID(),
    created_at: new Date().toISOString(),
    from: from.trim(),
    to,
    cc: addressList(body["cc"], "cc", false),
    bcc: addressList(body["bcc"], "bcc", false),
    reply_to: addressList(body["reply_to"], "reply_to", false),
    subject,
    html: optionalString(body["html"], "html"),
    text: optionalString(body["text"], "text"),
    tags: parseTags(body["tags"]),
    headers: parseHeaders(body["headers"]),
    attachments: parseAttachments(body["attachments"]),
    scheduled_at: optionalString(body["scheduled_at"], "scheduled_at"),
    last_event: "delivered",
  };
}

function formatTime(iso: string): string {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  return `${d.toISOString().slice(0, 10)} ${d.toISOString().slice(11, 19)} UTC`;
}

const inboxCss = `
main.inbox { max-width: 80rem; display: grid; grid-template-columns: minmax(18rem, 26rem) 1fr; gap: 1.25rem; align-items: start; }
@media (max-width: 52rem) { main.inbox { grid-template-columns: 1fr; } }
.toolbar { display: flex; justify-content: space-between; align-items: center; gap: 0.75rem; margin-bottom: 0.75rem; }
.toolbar h1 { margin: 0; }
.list { list-style: none; margin: 0; padding: 0; background: var(--panel); border: 1px solid var(--line); border-radius: 10px; overflow: hidden; }
.list li + li { border-top: 1px solid var(--line); }
.list a { display: grid; gap: 0.1rem; padding: 0.65rem 0.85rem; color: inherit; text-decoration: none; }
.list a:hover { background: var(--accent-soft); }
.list a[aria-current="true"] { background: var(--accent-soft); box-shadow: inset 4px 0 0 var(--accent); }
.list .subject { font-weight: 600; overflow-wrap: anywhere; }
.list .meta { font-size: 0.8rem; color: var(--muted); overflow-wrap: anywhere; }
.fields { display: grid; grid-template-columns: max-content 1fr; gap: 0.25rem 0.9rem; margin: 0 0 1rem; }
.fields dt { color: var(--muted); }
.fields dd { margin: 0; overflow-wrap: anywhere; }
iframe.body { width: 100%; min-height: 28rem; border: 1px solid var(--line); border-radius: 8px; background: #fff; }
pre.text { white-space: pre-wrap; overflow-wrap: anywhere; background: #fff; border: 1px solid var(--line);
  border-radius: 8px; padding: 0.85rem; margin: 0; font-size: 0.875rem; }
.detail h2 { margin-top: 1.25rem; }
.tag { display: inline-block; background: var(--accent-soft); color: var(--accent); border-radius: 999px;
  padding: 0 0.5rem; font-size: 0.8rem; margin-right: 0.25rem; }
form.inline { margin: 0; }
`;

const inboxPageHeaders = {
  "Cache-Control": "no-store",
  // The message's HTML is shown in a sandboxed srcdoc iframe (no scripts); it inherits this
  // policy, so its images may come only from loopback addresses or data: URLs.
  "Content-Security-Policy":
    "default-src 'none'; style-src 'unsafe-inline'; img-src data: http://127.0.0.1:* http://localhost:*; frame-src 'self'; form-action 'self'; frame-ancestors 'none'",
  "X-Content-Type-Options": "nosniff",
  "Referrer-Policy": "no-referrer",
};

function renderFieldRow(label: string, value: string[] | string | null): string {
  if (value === null || (Array.isArray(value) && value.length === 0)) return "";
  const text = Array.isArray(value) ? value.join(", ") : value;
  return `<dt>${escapeHtml(label)}</dt><dd>${escapeHtml(text)}</dd>`;
}

function renderInbox(messages: StoredEmail[], selected: StoredEmail | undefined, missingId?: string): string {
  const items = messages
    .map(
      (m) => `<li><a href="/?id=${encodeURIComponent(m.id)}"${selected?.id === m.id ? ' aria-current="true"' : ""}>
<span class="subject">${escapeHtml(m.subject)}</span>
<span class="meta">To ${escapeHtml(m.to.join(", "))}</span>
<span class="meta"><time datetime="${escapeHtml(m.created_at)}">${escapeHtml(formatTime(m.created_at))}</time></span>
</a></li>`,
    )
    .join("\n");
  const list =
    messages.length === 0
      ? `<div class="card"><p class="muted">No messages yet. Mail the app sends appears here.</p></div>`
      : `<ul class="list" aria-label="Messages, newest first">${items}</ul>`;

  let detail: string;
  if (selected) {
    const tags = selected.tags?.length
      ? `<dt>Tags</dt><dd>${selected.tags.map((t) => `<span class="tag">${escapeHtml(t.name)}=${escapeHtml(t.value)}</span>`).join("")}</dd>`
      : "";
    const attachments = selected.attachments?.length
      ? renderFieldRow(
          "Attachments",
          selected.attachments.map((a) => `${a.filename ?? "(unnamed)"}${a.size !== null ? ` (${a.size} bytes)` : ""}`),
        )
      : "";
    // Links open outside the frame; the frame itself runs no scripts.
    const srcdoc = selected.html !== null ? `<base target="_blank">${selected.html}` : "";
    const htmlPart =
      selected.html !== null
        ? `<iframe class="body" title="HTML body of “${escapeHtml(selected.subject)}”" sandbox="allow-popups allow-popups-to-escape-sandbox" srcdoc="${escapeHtml(srcdoc)}"></iframe>`
        : `<p class="muted">This message has no HTML body.</p>`;
    const textPart =
      selected.text !== null
        ? `<pre class="text">${escapeHtml(selected.text)}</pre>`
        : `<p class="muted">This message has no text body.</p>`;
    detail = `<article class="detail" aria-labelledby="msg-subject">
<h1 id="msg-subject">${escapeHtml(selected.subject)}</h1>
<dl class="fields">
${renderFieldRow("From", selected.from)}
${renderFieldRow("To", selected.to)}
${renderFieldRow("Cc", selected.cc)}
${renderFieldRow("Bcc", selected.bcc)}
${renderFieldRow("Reply to", selected.reply_to)}
<dt>Sent</dt><dd><time datetime="${escapeHtml(selected.created_at)}">${escapeHtml(formatTime(selected.created_at))}</time></dd>
${tags}
${attachments}
<dt>Id</dt><dd class="mono"><a href="/emails/${encodeURIComponent(selected.id)}">${escapeHtml(selected.id)}</a></dd>
</dl>
<h2>HTML body</h2>
${htmlPart}
<h2>Text body</h2>
${textPart}
</article>`;
  } else if (missingId !== undefined) {
    detail = `<div class="card" role="alert"><p>No message with id <span class="mono">${escapeHtml(missingId)}</span>. It may have been cleared.</p></div>`;
  } else {
    detail = `<div class="card"><p class="muted">${messages.length > 0 ? "Choose a message to read it." : "Nothing to show."}</p></div>`;
  }

  const body = `<main class="inbox">
<section aria-labelledby="inbox-heading">
<div class="toolbar">
<h1 id="inbox-heading" style="font-size:1.25rem">Inbox <span class="muted">(${messages.length})</span></h1>
<div style="display:flex;gap:0.5rem">
<a class="btn secondary" href="/">Refresh</a>
${messages.length > 0 ? `<form class="inline" method="post" action="/_clear"><button class="btn secondary" type="submit">Clear</button></form>` : ""}
</div>
</div>
${list}
</section>
<section aria-label="Message">
${detail}
</section>
</main>`;
  return renderPage({
    title: selected ? `${selected.subject} · Inbox` : "Inbox · Local mail",
    band: "Local mail (nothing is delivered)",
    body,
    extraCss: inboxCss,
  });
}

async function loadMessages(file: string, log?: (line: string) => void): Promise<StoredEmail[]> {
  let raw: string;
  try {
    raw = await readFile(file, "utf8");
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === "ENOENT") return [];
    throw err;
  }
  const messages: StoredEmail[] = [];
  let skipped = 0;
  for (const line of raw.split("\n")) {
    if (line.trim() === "") continue;
    try {
      const m = JSON.parse(line) as StoredEmail;
      if (m && typeof m.id === "string" && Array.isArray(m.to)) messages.push(m);
      else skipped++;
    } catch {
      skipped++;
    }
  }
  if (skipped > 0) log?.(`[mail] skipped ${skipped} unreadable line(s) in ${file}`);
  return messages;
}

export async function startMail(opts: MailOptions): Promise<MailHandle> {
  await mkdir(opts.dataDir, { recursive: true });
  const file = path.join(opts.dataDir, "mail.jsonl");
  const messages = await loadMessages(file, opts.log);
  const failNext = { count: 0, status: 500, message: "" };
  const idempotency = new Map<string, { hash: string; status: number; body: unknown; at: number }>();

  // File writes run one after another so lines never interleave and a clear is not undone.
  let writes: Promise<unknown> = Promise.resolve();
  const enqueueWrite = (fn: () => Promise<void>): Promise<void> => {
    const next = writes.then(fn);
    writes = next.catch(() => undefined);
    return next;
  };

  async function store(batch: StoredEmail[]): Promise<void> {
    await enqueueWrite(() => appendFile(file, batch.map((m) => `${JSON.stringify(m)}\n`).join(""), "utf8"));
    messages.push(...batch);
  }

  const app = express();
  app.disable("x-powered-by");
  app.set("etag", false);

  const requireKey = (req: Request, _res: Response, next: NextFunction) => {
    const header = req.get("authorization") ?? "";
    const match = /^bearer\s+(\S+)\s*$/i.exec(header);
    if (!match) {
      next(
        new ApiError(
          401,
          "missing_api_key",
          "Missing API key in the authorization header. Include `Authorization: Bearer <key>` in the request.",
        ),
      );
      return;
    }
    next();
  };

  const consumeFailure = (): ApiError | undefined => {
    if (failNext.count <= 0) return undefined;
    failNext.count--;
    return new ApiError(
      failNext.status,
      nameForStatus(failNext.status),
      failNext.message || `Simulated failure (status ${failNext.status}) requested through /_fail-next.`,
    );
  };

  /** Replays the stored answer for a repeated Idempotency-Key, or runs `produce` and remembers it. */
  async function withIdempotency(
    req: Request,
    res: Response,
    produce: () => Promise<{ status: number; body: unknown }>,
  ): Promise<void> {
    const key = req.get("idempotency-key");
    const hash = createHash("sha256")
      .update(`${req.path}\n${JSON.stringify(req.body)}`)
      .digest("hex");
    const now = Date.now();
    for (const [k, v] of idempotency) if (now - v.at > IDEMPOTENCY_TTL_MS) idempotency.delete(k);
    if (key) {
      const previous = idempotency.get(key);
      if (previous) {
        if (previous.hash !== hash) {
          throw new ApiError(
            409,
            "invalid_idempotent_request",
            "This idempotency key was already used with a different request.",
          );
        }
        res.status(previous.status).json(previous.body);
        return;
      }
    }
    const result = await produce();
    if (key) idempotency.set(key, { hash, status: result.status, body: result.body, at: now });
    res.status(result.status).json(result.body);
  }

  const jsonBody = express.json({ limit: "40mb", strict: false });

  app.post("/emails", requireKey, jsonBody, async (req, res, next) => {
    try {
      const failure = consumeFailure();
      if (failure) throw failure;
      await withIdempotency(req, res, async () => {
        const message = toStoredEmail(req.body);
        await store([message]);
        return { status: 200, body: { id: message.id } };
      });
    } catch (err) {
      next(err);
    }
  });

  app.post("/emails/batch", requireKey, jsonBody, async (req, res, next) => {
    try {
      const failure = consumeFailure();
      if (failure) throw failure;
      await withIdempotency(req, res, async () => {
        if (!Array.isArray(req.body) || req.body.length === 0) {
          throw new ApiError(422, "validation_error", "The request body must be a non-empty array of e-mails.");
        }
        if (req.body.length > MAX_BATCH) {
          throw new ApiError(422, "validation_error", `A batch holds at most ${MAX_BATCH} e-mails.`);
        }
        const batch = (req.body as unknown[]).map((item, index) => {
          try {
            return toStoredEmail(item);
          } catch (err) {
            if (err instanceof ApiError)
              throw new ApiError(err.statusCode, err.errorName, `emails[${index}]: ${err.message}`);
            throw err;
          }
        });
        await store(batch);
        return { status: 200, body: { data: batch.map((m) => ({ id: m.id })) } };
      });
    } catch (err) {
      next(err);
    }
  });

  app.get("/emails", (req, res) => {
    const to = typeof req.query["to"] === "string" ? req.query["to"].trim().toLowerCase() : "";
    const limitRaw = typeof req.query["limit"] === "string" ? Number(req.query["limit"]) : NaN;
    let data = [...messages].reverse();
    if (to) {
      const matches = (list: string[] | null) => (list ?? []).some((a) => a.toLowerCase().includes(to));
      data = data.filter((m) => matches(m.to) || matches(m.cc) || matches(m.bcc));
    }
    const limited = Number.isInteger(limitRaw) && limitRaw > 0 ? data.slice(0, limitRaw) : data;
    res.json({ object: "list", has_more: limited.length < data.length, data: limited });
  });

  app.get("/emails/:id", (req, res, next) => {
    const message = messages.find((m) => m.id === req.params["id"]);
    if (!message) {
      next(new ApiError(404, "not_found", "Email not found."));
      return;
    }
    res.json(message);
  });

  const clearAll = async (): Promise<number> => {
    const count = messages.length;
    await enqueueWrite(() => writeFile(file, "", "utf8"));
    messages.length = 0;
    return count;
  };

  app.delete("/emails", async (_req, res, next) => {
    try {
      res.json({ deleted: await clearAll() });
    } catch (err) {
      next(err);
    }
  });

  app.post("/_fail-next", express.json({ strict: false }), (req, res, next) => {
    const body = (req.body ?? {}) as { count?: unknown; status?: unknown; message?: unknown };
    const count = body.count === undefined ? 1 : body.count;
    const status = body.status === undefined ? 500 : body.status;
    if (typeof count !== "number" || !Number.isInteger(count) || count < 0 || count > 10_000) {
      next(new ApiError(422, "validation_error", "`count` must be an integer from 0 to 10000."));
      return;
    }
    if (typeof status !== "number" || !Number.isInteger(status) || status < 400 || status > 599) {
      next(new ApiError(422, "validation_error", "`status` must be an HTTP error status from 400 to 599."));
      return;
    }
    failNext.count = count;
    failNext.status = status;
    failNext.message = typeof body.message === "string" ? body.message : "";
    res.json({ count, status });
  });

  // The inbox page's "Clear" button (HTML forms cannot send DELETE).
  app.post("/_clear", async (_req, res, next) => {
    try {
      await clearAll();
      res.redirect(303, "/");
    } catch (err) {
      next(err);
    }
  });

  app.get("/", (req, res) => {
    const id = typeof req.query["id"] === "string" ? req.query["id"] : undefined;
    const selected = id ? messages.find((m) => m.id === id) : undefined;
    res
      .status(id && !selected ? 404 : 200)
      .set(inboxPageHeaders)
      .type("html")
      .send(renderInbox([...messages].reverse(), selected, id && !selected ? id : undefined));
  });

  app.get("/favicon.ico", (_req, res) => {
    res.status(204).end();
  });

  app.use((_req, _res, next) => {
    next(new ApiError(404, "not_found", "The requested endpoint does not exist."));
  });

  app.use((err: unknown, _req: Request, res: Response, _next: NextFunction) => {
    if (err instanceof ApiError) {
      res.status(err.statusCode).json(err.toJSON());
      return;
    }
    const e = err as { type?: string; status?: number; message?: string };
    if (e && e.type === "entity.parse.failed") {
      res
        .status(400)
        .json({ statusCode: 400, name: "validation_error", message: "The request body is not valid JSON." });
      return;
    }
    if (e && e.type === "entity.too.large") {
      res.status(413).json({ statusCode: 413, name: "validation_error", message: "The request body is too large." });
      return;
    }
    opts.log?.(`[mail] error: ${e?.message ?? String(err)}`);
    res
      .status(500)
      .json({ statusCode: 500, name: "application_error", message: "Unexpected error in the local mail service." });
  });

  const server = createServer(app);
  if (opts.log) logRequests(server, "mail", opts.log);
  await listen(server, opts.port, opts.host);
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://${hostForUrl(opts.host)}:${port}`,
    server,
    stop: async () => {
      await closeServer(server);
      await writes;
    },
  };
}
