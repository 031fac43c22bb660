import type { Knex } from "knex";
import { mmPerYearToMpy } from "../domain/index.ts";
import type { Db } from "../services/db.server";
import { env } from "../services/env.server";
import { ACTIVE_CONTRACT_SQL } from "./sites.server";

/**
 * E-mail notifications, written to the outbox (email_outbox) inside the caller's
 * transaction, so a message exists exactly when the change that causes it commits.
 * Delivery is the job queue's business (app/services/jobs.server.ts); when the queue
 * runs in this process it is told about new messages right after the commit.
 *
 * Who hears about what:
 * - a packet submitted → every active integrity engineer of the owner;
 * - a packet returned or approved → the technician who submitted it;
 * - a packet approved with a high or severe result → also the owner's integrity
 *   engineers and plant managers, with the engineering caution;
 * - every day → each contractor's technicians, the pulls that are overdue at the sites
 *   its live coupon-monitoring contracts cover.
 * Each message is one recipient's, keyed by event and address, so repeating an event
 * (a retried job, a second run of the daily reminder) adds nothing.
 */

export type NotificationEvent =
  | { kind: "submission.submitted"; submissionId: string }
  | { kind: "submission.returned"; submissionId: string }
  | { kind: "submission.approved"; submissionId: string }
  /** An approved packet reopened as a correction (`submissionId` is the correction's). */
  | { kind: "submission.correction_opened"; submissionId: string }
  /** `day` is the reminder's UTC date, YYYY-MM-DD: one reminder per contractor per day. */
  | { kind: "overdue.reminder"; contractorId: string; day: string };

type OutboxMessage = {
  ownerId: string | null;
  eventKey: string;
  to: string;
  subject: string;
  html: string;
  text: string;
};

type Recipient = { email: string; name: string; units: "si" | "us"; role: string };

// --------------------------------------------------------------------------- after commit

let committedListener: ((outboxIds: string[]) => unknown) | undefined;

/**
 * The job queue registers here when it starts in this process, to queue new messages as
 * soon as their transaction commits (the minute sweep catches anything this misses).
 */
export function onOutboxCommitted(listener: ((outboxIds: string[]) => unknown) | undefined): void {
  committedListener = listener;
}

function announceAfterCommit(conn: Db, ids: string[]) {
  const listener = committedListener;
  if (!listener || ids.length === 0) return;
  const run = () => {
    try {
      void Promise.resolve(listener(ids)).catch(() => undefined);
    } catch {
      // the sweep delivers it
    }
  };
  if (!conn.isTransaction) return run();
  // The outermost transaction: a savepoint's release is not yet a commit.
  let trx = conn as Knex.Transaction;
  while (trx.parentTransaction) trx = trx.parentTransaction;
  trx.executionPromise.then(run, () => undefined);
}

// --------------------------------------------------------------------------- writing

async function writeOutbox(conn: Db, messages: OutboxMessage[]): Promise<string[]> {
  if (messages.length === 0) return [];
  const rows = await conn("email_outbox")
    .insert(
      messages.map((m) => ({
        owner_id: m.ownerId,
        event_key: m.eventKey,
        to_email: m.to,
        subject: m.subject,
        html: m.html,
        text: m.text,
      })),
    )
    .onConflict("event_key")
    .ignore()
    .returning("id");
  return rows.map((r: { id: string }) => r.id);
}

/**
 * Writes the messages an event causes into the outbox, inside `trx` (the transaction of
 * the change itself). Returns the ids of the messages added; an event already notified
 * adds none.
 */
export async function enqueueNotification(trx: Db, event: NotificationEvent): Promise<string[]> {
  const messages =
    event.kind === "overdue.reminder"
      ? await reminderMessages(trx, event.contractorId, event.day)
      : await packetMessages(trx, event);
  const ids = await writeOutbox(trx, messages);
  announceAfterCommit(trx, ids);
  return ids;
}

// --------------------------------------------------------------------------- packets

type PacketFacts = {
  id: string;
  reference: string;
  revision: number;
  status: string;
  worstSeverity: string | null;
  flagCount: number;
  resultCount: number;
  decisionComment: string | null;
  ownerId: string;
  ownerName: string;
  contractorName: string;
  siteName: string;
  submittedBy: string | null;
  decidedByName: string | null;
};

async function packetFacts(conn: Db, submissionId: string): Promise<PacketFacts> {
  const r = await conn("submissions as sub")
    .join("organisations as o", "o.id", "sub.owner_id")
    .join("organisations as k", "k.id", "sub.contractor_id")
    .join("sites as s", "s.id", "sub.site_id")
    .leftJoin("users as d", "d.id", "sub.decided_by")
    .where("sub.id", submissionId)
    .first(
      "sub.id",
      "sub.reference",
      "sub.revision",
      "sub.status",
      "sub.worst_severity",
      "sub.flag_count",
      "sub.decision_comment",
      "sub.owner_id",
      "sub.submitted_by",
      "o.name as owner_name",
      "k.name as contractor_name",
      "s.name as site_name",
      "d.name as decided_by_name",
      conn.raw("(select count(*)::int from coupon_results r where r.submission_id = sub.id) as result_count"),
    );
  if (!r) throw new Error(`no submission ${submissionId} to notify about`);
  return {
    id: r.id,
    reference: r.reference,
    revision: r.revision,
    status: r.status,
    worstSeverity: r.worst_severity,
    flagCount: r.flag_count,
    resultCount: r.result_count,
    decisionComment: r.decision_comment,
    ownerId: r.owner_id,
    ownerName: r.owner_name,
    contractorName: r.contractor_name,
    siteName: r.site_name,
    submittedBy: r.submitted_by,
    decidedByName: r.decided_by_name,
  };
}

async function ownerStaff(conn: Db, ownerId: string, roles: string[]): Promise<Recipient[]> {
  return conn("users")
    .where({ organisation_id: ownerId, status: "active" })
    .whereIn("role", roles)
    .orderBy("email")
    .select("email", "name", "units", "role");
}

async function activeUser(conn: Db, userId: string | null): Promise<Recipient[]> {
  if (!userId) return [];
  return conn("users").where({ id: userId, status: "active" }).select("email", "name", "units", "role");
}

type SeriousResult = {
  pointTag: string;
  couponSerial: string;
  generalMmY: number;
  pittingMmY: number | null;
  general: string;
  pitting: string | null;
  worst: string;
};

async function seriousResults(conn: Db, submissionId: string): Promise<SeriousResult[]> {
  const { rows } = await conn.raw(
    `select p.tag as point_tag, cp.serial,
            (r.computed->'rate'->>'mmPerYear')::float8 as general_mm_y,
            (r.computed->'pitting'->>'mmPerYear')::float8 as pitting_mm_y,
            r.general_severity, r.pitting_severity, r.computed->'severity'->>'worst' as worst
       from coupon_results r
       join coupon_exposures e on e.id = r.exposure_id
       join coupons cp on cp.id = e.coupon_id
       join monitoring_points p on p.id = e.point_id
      where r.submission_id = ? and r.computed->'severity'->>'worst' in ('high', 'severe')
      order by p.tag`,
    [submissionId],
  );
  return rows.map((r: Record<string, any>) => ({
    pointTag: r.point_tag,
    couponSerial: r.serial,
    generalMmY: r.general_mm_y,
    pittingMmY: r.pitting_mm_y,
    general: r.general_severity,
    pitting: r.pitting_severity,
    worst: r.worst,
  }));
}

async function packetMessages(
  conn: Db,
  event: Exclude<NotificationEvent, { kind: "overdue.reminder" }>,
): Promise<OutboxMessage[]> {
  const p = await packetFacts(conn, event.submissionId);
  const origin = env().APP_ORIGIN;
  const key = (kind: string, r: Recipient) => `${kind}:${p.id}:rev${p.revision}:${r.email.toLowerCase()}`;
  const reviewUrl = `${origin}/review/${p.id}`;
  const packetUrl = `${origin}/packets/${p.id}`;
  const out: OutboxMessage[] = [];

  if (event.kind === "submission.submitted") {
    const facts = [
      `${count(p.resultCount, "coupon result")}`,
      p.worstSeverity ? `worst severity ${p.worstSeverity}` : null,
      p.flagCount > 0 ? `${count(p.flagCount, "quality flag")} to look at` : "no quality flags",
    ].filter(Boolean);
    for (const r of await ownerStaff(conn, p.ownerId, ["integrity_engineer"])) {
      out.push({
        ownerId: p.ownerId,
        eventKey: key(event.kind, r),
        to: r.email,
        ...compose({
          subject: `Packet ${p.reference} submitted by ${p.contractorName}`,
          greeting: r.name,
          paragraphs: [
            `${p.contractorName} submitted packet ${p.reference}${p.revision > 1 ? ` (revision ${p.revision})` : ""} for ${p.siteName}: ${facts.join(", ")}.`,
            "It is waiting for an integrity engineer to approve it or return it with a comment.",
          ],
          link: { label: "Review the packet", url: reviewUrl },
          footer: `You receive this because you are an integrity engineer of ${p.ownerName} in Wallcast.`,
        }),
      });
    }
    return out;
  }

  if (event.kind === "submission.correction_opened") {
    // The correction has no submitter yet: tell whoever submitted the packet it corrects.
    const original = await conn("submissions as c")
      .join("submissions as o", "o.id", "c.supersedes_id")
      .where("c.id", p.id)
      .first("o.submitted_by", "c.correction_reason");
    for (const r of await activeUser(conn, original?.submitted_by ?? null)) {
      out.push({
        ownerId: p.ownerId,
        eventKey: key(event.kind, r),
        to: r.email,
        ...compose({
          subject: `Packet ${p.reference} reopened for correction by ${p.ownerName}`,
          greeting: r.name,
          paragraphs: [
            `${p.ownerName} reopened approved packet ${p.reference} for ${p.siteName} as a correction (revision ${p.revision}).`,
            "Edit the results the reason points to and submit the correction; the approved packet stays in force until the correction is approved.",
          ],
          quote: original?.correction_reason ? { label: "Reason", text: original.correction_reason } : undefined,
          link: { label: "Open the correction", url: packetUrl },
          footer: `You receive this because you submitted this packet for ${p.contractorName}.`,
        }),
      });
    }
    return out;
  }

  const approved = event.kind === "submission.approved";
  const comment = p.decisionComment?.trim() || null;
  const by = p.decidedByName ? `${p.decidedByName} of ${p.ownerName}` : p.ownerName;
  for (const r of await activeUser(conn, p.submittedBy)) {
    out.push({
      ownerId: p.ownerId,
      eventKey: key(event.kind, r),
      to: r.email,
      ...compose({
        subject: approved
          ? `Packet ${p.reference} approved by ${p.ownerName}`
          : `Packet ${p.reference} returned by ${p.ownerName}: changes requested`,
        greeting: r.name,
        paragraphs: approved
          ? [
              `${by} approved packet ${p.reference}${p.revision > 1 ? ` (revision ${p.revision})` : ""} for ${p.siteName}. Its results are now part of the owner's record.`,
            ]
          : [
              `${by} returned packet ${p.reference}${p.revision > 1 ? ` (revision ${p.revision})` : ""} for ${p.siteName}.`,
              "Correct the results the comment points to, then submit the packet again; it comes back as the next revision.",
            ],
        quote: comment ? { label: approved ? "Comment" : "What to change", text: comment } : undefined,
        link: { label: "Open the packet", url: packetUrl },
        footer: `You receive this because you submitted this packet for ${p.contractorName}.`,
      }),
    });
  }

  if (approved && (p.worstSeverity === "high" || p.worstSeverity === "severe")) {
    const results = await seriousResults(conn, p.id);
    const word = p.worstSeverity;
    for (const r of await ownerStaff(conn, p.ownerId, ["integrity_engineer", "plant_manager"])) {
      const us = r.units === "us";
      const rate = (mmY: number | null) =>
        mmY === null || !Number.isFinite(mmY)
          ? "—"
          : us
            ? `${mmPerYearToMpy(mmY).toFixed(2)} mpy`
            : `${mmY.toFixed(3)} mm/y`;
      out.push({
        ownerId: p.ownerId,
        eventKey: key("submission.approved-serious", r),
        to: r.email,
        ...compose({
          subject: `${capitalise(word)} corrosion result approved: packet ${p.reference} at ${p.siteName}`,
          greeting: r.name,
          paragraphs: [
            `Packet ${p.reference} from ${p.contractorName} was approved by ${by} with a worst severity of ${word}.`,
            results.length
              ? `The results at high or severe:`
              : `Open the packet to see which results drive the severity.`,
          ],
          table: results.length
            ? {
                head: ["Point", "Coupon", "General rate", "Pitting rate", "Severity"],
                rows: results.map((x) => [x.pointTag, x.couponSerial, rate(x.generalMmY), rate(x.pittingMmY), x.worst]),
              }
            : undefined,
          caution: CAUTION,
          link: { label: "Open the review", url: reviewUrl },
          footer: `You receive this because you are ${r.role === "plant_manager" ? "a plant manager" : "an integrity engineer"} of ${p.ownerName} in Wallcast; both hear of every high or severe result approved.`,
        }),
      });
    }
  }
  return out;
}

/** Carried by every message whose numbers can drive a decision about a line. */
export const CAUTION =
  "These results need review by a qualified engineer or authorised inspector before anyone acts on them; local codes and the owner's procedures govern.";

// --------------------------------------------------------------------------- daily reminder

type OverduePull = {
  ownerName: string;
  siteName: string;
  pointTag: string;
  circuitTag: string;
  couponSerial: string;
  dueOn: string;
  daysOverdue: number;
};

/**
 * Coupons in service past their point's planned exposure, at the sites a contractor's
 * live coupon-monitoring contracts cover (the pull schedule's "overdue", for every such
 * contractor at once, or for one).
 */
async function overduePulls(
  conn: Db,
  contractorId: string | null,
): Promise<Array<OverduePull & { contractorId: string }>> {
  const { rows } = await conn.raw(
    `with covered as (
       select distinct c.contractor_id, cs.site_id
         from contracts c
         join contract_sites cs on cs.contract_id = c.id
        where ${ACTIVE_CONTRACT_SQL}
          and 'coupon_monitoring' = any(c.scope)
          and (?::uuid is null or c.contractor_id = ?::uuid)
     ), pulls as (
       select cv.contractor_id, o.name as owner_name, s.name as site_name, p.tag as point_tag, ci.tag as circuit_tag,
              cp.serial as coupon_serial,
              to_char((e.installed_at + make_interval(days => p.planned_exposure_days)) at time zone s.time_zone, 'YYYY-MM-DD') as due_on,
              ceil(extract(epoch from (e.installed_at + make_interval(days => p.planned_exposure_days)) - now()) / 86400)::int as days_to_due
         from covered cv
         join sites s on s.id = cv.site_id
         join organisations o on o.id = s.owner_id
         join monitoring_points p on p.site_id = s.id and p.active and p.kind = 'coupon'
         join circuits ci on ci.id = p.circuit_id
         join coupon_exposures e on e.point_id = p.id and e.removed_at is null
         join coupons cp on cp.id = e.coupon_id
     )
     select * from pulls where days_to_due < 0 order by contractor_id, owner_name, site_name, point_tag`,
    [contractorId, contractorId],
  );
  return rows.map((r: Record<string, any>) => ({
    contractorId: r.contractor_id,
    ownerName: r.owner_name,
    siteName: r.site_name,
    pointTag: r.point_tag,
    circuitTag: r.circuit_tag,
    couponSerial: r.coupon_serial,
    dueOn: r.due_on,
    daysOverdue: -r.days_to_due,
  }));
}

async function reminderMessages(conn: Db, contractorId: string, day: string): Promise<OutboxMessage[]> {
  if (!/^\d{4}-\d{2}-\d{2}$/.test(day)) throw new RangeError(`day must be YYYY-MM-DD (got ${day})`);
  const pulls = await overduePulls(conn, contractorId);
  if (pulls.length === 0) return [];
  const contractor = await conn("organisations").where({ id: contractorId, kind: "contractor" }).first("name");
  if (!contractor) return [];
  const technicians: Recipient[] = await conn("users")
    .where({ organisation_id: contractorId, role: "contractor_technician", status: "active" })
    .orderBy("email")
    .select("email", "name", "units", "role");
  const owners = [...new Set(pulls.map((p) => p.ownerName))];
  return technicians.map((r) => ({
    ownerId: null,
    eventKey: `overdue.reminder:${contractorId}:${day}:${r.email.toLowerCase()}`,
    to: r.email,
    ...compose({
      subject: `${count(pulls.length, "coupon pull")} overdue for ${contractor.name}`,
      greeting: r.name,
      paragraphs: [
        `${pulls.length === 1 ? "This coupon has" : "These coupons have"} been in service longer than ${pulls.length === 1 ? "its point's" : "their points'"} planned exposure, at sites your company's coupon-monitoring contracts with ${owners.join(", ")} cover. Pull ${pulls.length === 1 ? "it" : "them"} as soon as the plant allows, or tell the owner's engineer why not.`,
      ],
      table: {
        head: ["Owner", "Site", "Point", "Circuit", "Coupon", "Due on (site date)", "Days overdue"],
        rows: pulls.map((p) => [
          p.ownerName,
          p.siteName,
          p.pointTag,
          p.circuitTag,
          p.couponSerial,
          p.dueOn,
          String(p.daysOverdue),
        ]),
      },
      link: { label: "Open the pull schedule", url: `${env().APP_ORIGIN}/pulls` },
      footer: `You receive this daily reminder while ${contractor.name} has overdue pulls in Wallcast (as of ${day}, UTC).`,
    }),
  }));
}

/**
 * The daily reminder for every contractor with overdue pulls, one transaction per
 * contractor. Running it twice on one day adds nothing. Returns the ids written.
 */
export async function enqueueOverdueReminders(
  conn: Knex,
  day: string = new Date().toISOString().slice(0, 10),
): Promise<string[]> {
  const contractors = [...new Set((await overduePulls(conn, null)).map((p) => p.contractorId))];
  const ids: string[] = [];
  for (const contractorId of contractors) {
    ids.push(
      ...(await conn.transaction((trx) => enqueueNotification(trx, { kind: "overdue.reminder", contractorId, day }))),
    );
  }
  return ids;
}

// --------------------------------------------------------------------------- bodies

/** Every interpolated value in the HTML goes through this. */
export function escapeHtml(value: unknown): string {
  return String(value ?? "")
    .replace(/&/g, "&amp;")
    .replace(/</g, "&lt;")
    .replace(/>/g, "&gt;")
    .replace(/"/g, "&quot;")
    .replace(/'/g, "&#39;");
}

const count = (n: number, noun: string) => `${n} ${noun}${n === 1 ? "" : "s"}`;
const capitalise = (s: string) => s.charAt(0).toUpperCase() + s.slice(1);

type Body = {
  subject: string;
  greeting: string;
  paragraphs: string[];
  quote?: { label: string; text: string };
  table?: { head: string[]; rows: string[][] };
  caution?: string;
  link: { label: string; url: string };
  footer: string;
};

/** One message as HTML (inline styles: mail clients drop style sheets) and as plain text. */
function compose(b: Body): { subject: string; html: string; text: string } {
  const hello = b.greeting?.trim() ? `Hello ${b.greeting.trim()},` : "Hello,";
  const cell = "border:1px solid #d0d5dd;padding:4px 8px;text-align:left;vertical-align:top";
  const html = [
    `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(b.subject)}</title></head>`,
    `<body style="margin:0;padding:16px;background:#f6f7f9;font-family:Arial,Helvetica,sans-serif;font-size:15px;line-height:1.45;color:#1d2433">`,
    `<div style="max-width:640px;margin:0 auto;background:#ffffff;border:1px solid #e3e6eb;border-radius:8px;padding:20px">`,
    `<p style="margin:0 0 12px;font-size:13px;color:#5b6475">Wallcast</p>`,
    `<p style="margin:0 0 12px">${escapeHtml(hello)}</p>`,
    ...b.paragraphs.map((p) => `<p style="margin:0 0 12px">${escapeHtml(p)}</p>`),
    b.quote
      ? `<p style="margin:0 0 4px;font-weight:bold">${escapeHtml(b.quote.label)}:</p><blockquote style="margin:0 0 12px;padding:8px 12px;border-left:4px solid #8a94a6;background:#f6f7f9;white-space:pre-wrap">${escapeHtml(b.quote.text)}</blockquote>`
      : "",
    b.table
      ? `<table style="border-collapse:collapse;margin:0 0 12px;font-size:14px"><thead><tr>${b.table.head
          .map((h) => `<th scope="col" style="${cell};background:#eef1f5">${escapeHtml(h)}</th>`)
          .join("")}</tr></thead><tbody>${b.table.rows
          .map((row) => `<tr>${row.map((c) => `<td style="${cell}">${escapeHtml(c)}</td>`).join("")}</tr>`)
          .join("")}</tbody></table>`
      : "",
    b.caution
      ? `<p role="note" style="margin:0 0 12px;padding:8px 12px;border:1px solid #d9a441;background:#fff7e6;color:#6b4a00"><strong>Caution.</strong> ${escapeHtml(b.caution)}</p>`
      : "",
    `<p style="margin:16px 0"><a href="${escapeHtml(b.link.url)}" style="display:inline-block;background:#1f5fbf;color:#ffffff;text-decoration:none;padding:8px 14px;border-radius:6px">${escapeHtml(b.link.label)}</a></p>`,
    `<p style="margin:0 0 12px;font-size:13px;color:#5b6475">Or paste this address into your browser: ${escapeHtml(b.link.url)}</p>`,
    `<p style="margin:16px 0 0;font-size:12px;color:#5b6475">${escapeHtml(b.footer)}</p>`,
    `</div></body></html>`,
  ].join("\n");

  const text = [
    hello,
    "",
    ...b.paragraphs.flatMap((p) => [p, ""]),
    ...(b.quote ? [`${b.quote.label}:`, ...b.quote.text.split(/\r?\n/).map((l) => `> ${l}`), ""] : []),
    ...(b.table ? [textTable(b.table.head, b.table.rows), ""] : []),
    ...(b.caution ? [`CAUTION: ${b.caution}`, ""] : []),
    `${b.link.label}: ${b.link.url}`,
    "",
    "-- ",
    b.footer,
    "",
  ].join("\n");
  return { subject: b.subject, html, text };
}

function textTable(head: string[], rows: string[][]): string {
  const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => (r[i] ?? "").length)));
  const line = (cells: string[]) =>
    cells
      .map((c, i) => (c ?? "").padEnd(widths[i]))
      .join("  ")
      .trimEnd();
  return [line(head), line(widths.map((w) => "-".repeat(w))), ...rows.map(line)].join("\n");
}
