import { data, Form, Link, useNavigation } from "react-router";
import { z } from "zod";
import { AttachmentGallery } from "~/components/attachment-dropzone";
import { SeverityBadge, StatusBadge, type SeverityWord } from "~/components/badges";
import { Button } from "~/components/button";
import { CheckboxField, FormAlert, TextAreaField, TextField } from "~/components/field";
import { Card, EngineeringCaution, Facts, PageHeader } from "~/components/layout";
import {
  describeGeometry,
  FlagList,
  formatPittingFactor,
  Grade,
  massLossMethodWords,
} from "~/components/coupon-result";
import { formatGrams, formatQuantity } from "~/components/quantity";
import { TrendChart } from "~/components/trend-chart";
import { attachmentsForExposures, type AttachmentView } from "~/models/attachments.server";
import { listAudit } from "~/models/audit.server";
import { getSubmission, type SubmissionResult } from "~/models/submissions.server";
import { fieldErrorsOf } from "~/services/outcome";
import { decide, diffRevisions, openCorrection, pointHistory, revisionHistory } from "~/models/review.server";
import { correctedSubmissionOf, correctionsOf } from "~/models/submissions.server";
import { ownerSettings } from "~/models/owner-settings.server";
import { ackFieldName, flagsOfReading, flagsOfResult, type ReviewFlag } from "~/services/review-rules";
import { changeSinceLast, cmlHistories, surveyCircuits, surveyFiles } from "~/models/survey-review.server";
import { SurveyBody } from "~/components/survey-review";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser, requireUuid } from "~/services/guards.server";
import { can } from "~/services/permissions";
import { requestIdOf } from "~/services/problem.server";
import { formAction, invalidForm, pageLoad, readForm } from "~/services/respond.server";
import { auditActionWords } from "~/services/audit-words";
import { densitySourceLabel } from "~/services/coupon-spec";
import { formatLocal } from "~/services/time";
import { plainCharacters } from "~/services/form-fields";
import type { Route } from "./+types/review.$submissionId";

const decisionSchema = z.object({
  intent: z.enum(["approve", "return", "correct"], { error: "Unknown action." }),
  // the version the page was rendered with (a hidden field): digits only
  version: z
    .string()
    .regex(/^\d{1,9}$/, "The page is out of date: reload it and decide again.")
    .transform(Number)
    .optional(),
  comment: z
    .string()
    .max(4000, "Keep the comment under 4000 characters.")
    .superRefine(plainCharacters("the comment", true))
    .default(""),
  reason: z
    .string()
    .max(2000, "Keep the reason under 2000 characters.")
    .superRefine(plainCharacters("the reason", true))
    .default(""),
  confirm: z.enum(["on", "off"], { error: "Tick the box or leave it empty." }).optional(),
});

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireOwnerUser(args);
  const id = requireUuid(args.params.submissionId);
  return { user, id, ...(await pageLoad(() => getSubmission(db(), user, id))) };
}

export async function loader(args: Route.LoaderArgs) {
  const { user, id, ...detail } = await load(args);
  const { submission } = detail;
  const [revisions, trail, corrections, corrects] = await Promise.all([
    revisionHistory(db(), user, id),
    listAudit(db(), user.ownerId, { recordType: "submission", recordId: id, limit: 200 }),
    correctionsOf(db(), user.ownerId, id),
    correctedSubmissionOf(db(), user.ownerId, id),
  ]);
  const common = {
    submission,
    units: user.units,
    decides: can(user, "decideSubmissions"),
    // Links are shown only to those who may follow them.
    readsAudit: can(user, "readAudit"),
    revisions: revisions.map(({ results: _r, attachments: _a, ...rest }) => rest),
    trail: trail.map((t) => ({
      id: t.id,
      at: new Date(t.created_at).toISOString(),
      actor: t.actor_label,
      action: t.action,
      reason: t.reason,
    })),
    corrections: corrections.map((c) => ({
      id: c.id,
      status: c.status,
      revision: c.revision,
      reason: c.correction_reason,
    })),
    corrects: corrects
      ? {
          id: corrects.id,
          reference: corrects.reference,
          revision: corrects.revision,
          reason: corrects.correction_reason,
        }
      : null,
  };
  if (detail.kind === "thickness") {
    const { readings } = detail;
    const [circuits, histories, files] = await Promise.all([
      surveyCircuits(db(), user.ownerId, submission.siteId, id),
      cmlHistories(
        db(),
        user.ownerId,
        readings.map((r) => r.cmlId),
        id,
      ),
      surveyFiles(db(), user.ownerId, id),
    ]);
    const surveyDiffs = revisions.slice(1).map((rev, i) => ({
      from: revisions[i].revision,
      to: rev.revision,
      changes: diffRevisions(revisions[i], rev).map((c) => ({
        subject: "cml" in c ? c.cml : c.coupon,
        field: c.field,
        before: c.before,
        after: c.after,
      })),
    }));
    return {
      ...common,
      kind: "thickness" as const,
      survey: {
        circuits,
        readings,
        files,
        histories: Object.fromEntries(readings.map((r) => [r.id, histories.get(r.cmlId)])),
        changes: Object.fromEntries(readings.map((r) => [r.id, changeSinceLast(r, histories.get(r.cmlId))])),
      },
      // The same flags the server asks the engineer to acknowledge (app/services/review-rules.ts).
      flags: Object.fromEntries(readings.map((r) => [r.id, flagsOfReading(r)])) as Record<string, ReviewFlag[]>,
      diffs: surveyDiffs,
    };
  }
  const { results } = detail;
  const history = await pointHistory(
    db(),
    user.ownerId,
    results.map((r) => r.exposureId),
  );
  const [attachments, settings] = await Promise.all([
    attachmentsForExposures(
      db(),
      user,
      results.map((r) => r.exposureId),
    ),
    ownerSettings(db(), user.ownerId),
  ]);
  // The same flags the server asks the engineer to acknowledge (app/services/review-rules.ts).
  const flags: Record<string, ReviewFlag[]> = Object.fromEntries(
    results.map((r) => [r.id, flagsOfResult(r, attachments[r.exposureId] ?? [], settings.photosRequired)]),
  );
  const serials = new Map<string, string>(results.map((r) => [r.exposureId, r.couponSerial]));
  const diffs = revisions.slice(1).map((rev, i) => ({
    from: revisions[i].revision,
    to: rev.revision,
    changes: diffRevisions(revisions[i], rev, (e) => serials.get(e) ?? e.slice(0, 8)).map((c) => ({
      subject: "coupon" in c ? c.coupon : c.cml,
      field: c.field,
      before: c.before,
      after: c.after,
    })),
  }));
  return {
    ...common,
    kind: "coupon" as const,
    results,
    attachments,
    flags,
    photosRequired: settings.photosRequired,
    diffs,
    history,
  };
}

export async function action(args: Route.ActionArgs) {
  const { user, id, submission } = await load(args);
  if (!can(user, "decideSubmissions"))
    throw data("Only the owner's integrity engineers approve, return or correct submissions.", { status: 403 });
  const values = await readForm(args.request);
  const parsed = decisionSchema.safeParse(values);
  if (!parsed.success) {
    // A problem with a field the page does not show (the hidden version, the intent, the
    // reason of a correction form that is not on the page) is said at the top of the page.
    const errors = fieldErrorsOf(parsed.error);
    const shown = new Set(["comment", "confirm", ...(submission.status === "approved" ? ["reason"] : [])]);
    const hidden = Object.entries(errors).find(([field]) => !shown.has(field));
    return invalidForm(values, hidden ? { form: hidden[1], ...errors } : errors);
  }
  const { intent, version, comment, reason, confirm } = parsed.data;
  const requestId = requestIdOf(args.context);
  return formAction(values, async () => {
    if (intent === "correct") {
      const outcome = await openCorrection(db(), user, id, reason, requestId);
      return redirectWithFlash(`/review/${outcome.correctionId}`, {
        tone: "ok",
        message:
          "Correction opened. The contractor sees it as returned with your reason; the approved submission stays in force until the correction is approved.",
      });
    }
    if (!version) return invalidForm(values, { form: "The page is out of date: reload it and decide again." });
    const outcome = await decide(
      db(),
      user,
      id,
      { decision: intent, version, comment, acknowledgements: values, confirmed: confirm === "on" },
      requestId,
    );
    return redirectWithFlash(`/review/${id}`, {
      tone: "ok",
      message:
        intent === "approve"
          ? outcome.submission.kind === "thickness"
            ? `Thickness survey ${outcome.submission.reference} approved: its readings are now part of each CML's approved history.`
            : `Submission ${outcome.submission.reference} approved: its results are now part of the circuits' history.`
          : `Submission ${outcome.submission.reference} returned to ${outcome.submission.contractorName} with your comment.`,
    });
  });
}

export default function Review({ loaderData, actionData }: Route.ComponentProps) {
  const { submission, flags, units, decides, readsAudit, revisions, diffs, trail, corrections, corrects } = loaderData;
  const survey = loaderData.kind === "thickness" ? loaderData.survey : null;
  const coupons = loaderData.kind === "coupon" ? loaderData : null;
  const errors: Record<string, string> = actionData?.errors ?? {};
  const sent: Record<string, string> = (actionData && "values" in actionData ? actionData.values : undefined) ?? {};
  const busy = useNavigation().state === "submitting";
  const warnings = Object.values(flags)
    .flat()
    .filter((f) => f.severity === "warning");
  const latest = revisions[revisions.length - 1];
  const results = coupons?.results ?? [];
  const points = [...new Set(results.map((r) => r.pointTag))];
  const cmlTags = survey?.readings.map((r) => r.cmlTag) ?? [];
  const circuitTags = survey?.circuits.map((c) => c.tag) ?? [];
  const superseder = corrections.find((c) => c.status === "approved");
  const openCorrectionRow = corrections.find((c) => c.status !== "approved" && c.status !== "superseded");
  return (
    <div className="space-y-6">
      <PageHeader
        title={survey ? `Thickness survey ${submission.reference}` : `Submission ${submission.reference}`}
        question={
          submission.status === "submitted" && decides
            ? survey
              ? "Are these readings right? Check each CML against its history, required thickness and flags, then approve or return the survey."
              : "Are these results right? Check inputs, flags and the history at each point, then approve or return the submission."
            : survey
              ? "What this survey holds, who decided what, and when."
              : "What this submission holds, who decided what, and when."
        }
        actions={<Link to="/review">Back to the queue</Link>}
      >
        <div className="mt-2 flex flex-wrap items-center gap-2 text-sm">
          <StatusBadge status={submission.status} /> <span>revision {submission.revision}</span> ·{" "}
          <span>{submission.contractorName}</span> · <span>{submission.siteName}</span>
          {submission.worstSeverity ? (
            <span>
              · worst <SeverityBadge value={submission.worstSeverity as SeverityWord} emphasise />
            </span>
          ) : null}
        </div>
      </PageHeader>

      {errors.form ? <FormAlert tone={actionData?.conflict ? "warn" : "bad"}>{errors.form}</FormAlert> : null}
      {submission.status === "superseded" && superseder ? (
        <FormAlert tone="warn">
          Superseded by its correction (revision {superseder.revision}), approved. Reason for the correction:{" "}
          {superseder.reason}. <Link to={`/review/${superseder.id}`}>Open the correction</Link>
        </FormAlert>
      ) : null}
      {corrects ? (
        <FormAlert tone="warn">
          Correction of {corrects.reference} revision {corrects.revision}: {corrects.reason}.{" "}
          <Link to={`/review/${corrects.id}`}>Open the submission it corrects</Link>
        </FormAlert>
      ) : null}
      {openCorrectionRow ? (
        <FormAlert tone="warn">
          A correction of this submission is open (revision {openCorrectionRow.revision}, {openCorrectionRow.status}).{" "}
          <Link to={`/review/${openCorrectionRow.id}`}>Open it</Link>
        </FormAlert>
      ) : null}

      <Card title="Submission">
        <Facts
          items={[
            ["Site", `${submission.siteName} (${submission.siteCode}), times in ${submission.timeZone}`],
            ["Contractor", submission.contractorName],
            [
              "Submitted",
              submission.submittedAt ? formatLocal(submission.submittedAt, submission.timeZone) : "not yet",
            ],
            [
              "Decided",
              submission.decidedAt
                ? `${formatLocal(submission.decidedAt, submission.timeZone)}${submission.decidedByName ? ` by ${submission.decidedByName}` : ""}${submission.decisionComment ? ` — “${submission.decisionComment}”` : ""}`
                : submission.status === "submitted"
                  ? `not yet — revision ${submission.revision} waits for a decision`
                  : "not yet",
            ],
            survey
              ? [
                  "Readings",
                  circuitTags.length
                    ? `${survey.readings.length} on ${circuitTags.length === 1 ? "circuit" : "circuits"} ${circuitTags.join(", ")}`
                    : String(survey.readings.length),
                ]
              : ["Results", String(results.length)],
            [
              "Warnings",
              warnings.length === 0
                ? "none — notes, if any, need no reason"
                : submission.status === "submitted"
                  ? `${warnings.length} to acknowledge before approval`
                  : submission.status === "approved" || submission.status === "superseded"
                    ? `${warnings.length} acknowledged with reasons when approved (see the revisions)`
                    : String(warnings.length),
            ],
            ...(coupons
              ? [
                  [
                    "Photos",
                    coupons.photosRequired ? "a photo of every coupon is asked for" : "optional in your settings",
                  ] as [string, string],
                ]
              : []),
          ]}
        />
        {submission.status === "submitted" && latest?.reply ? (
          <div
            className="mt-3 rounded-md border border-rule bg-tide-50 px-3 py-2 text-sm"
            data-testid="contractor-reply"
          >
            <span className="font-semibold">Reply from {latest.submittedByName ?? submission.contractorName}</span> with
            revision {latest.revision}: “{latest.reply}”
          </div>
        ) : null}
      </Card>

      {coupons
        ? coupons.results.map((r) => (
            <ResultCard
              key={r.id}
              result={r}
              units={units}
              timeZone={submission.timeZone}
              history={coupons.history.filter((h: { pointTag: string }) => h.pointTag === r.pointTag)}
              attachments={coupons.attachments[r.exposureId] ?? []}
              flags={flags[r.id] ?? []}
            />
          ))
        : null}
      {survey ? (
        <SurveyBody
          circuits={survey.circuits}
          readings={survey.readings}
          histories={survey.histories}
          changes={survey.changes}
          flags={flags}
          files={survey.files}
          units={units}
        />
      ) : null}

      <Card title="Revisions">
        {revisions.length === 0 ? (
          <p className="text-sm text-ink-soft">No revision has been submitted yet.</p>
        ) : (
          <ol className="space-y-2 text-sm">
            {revisions.map((rev) => (
              <li key={`${rev.submissionId}-${rev.revision}`}>
                <span className="font-medium">Revision {rev.revision}</span> submitted{" "}
                {formatLocal(rev.submittedAt, submission.timeZone)}
                {rev.submittedByName ? ` by ${rev.submittedByName}` : ""}
                {rev.decision ? (
                  <>
                    {" "}
                    — <StatusBadge status={rev.decision} />{" "}
                    {rev.decidedAt ? formatLocal(rev.decidedAt, submission.timeZone) : ""}
                    {rev.decidedByName ? ` by ${rev.decidedByName}` : ""}
                    {rev.decisionComment ? <span className="text-ink-soft"> “{rev.decisionComment}”</span> : null}
                  </>
                ) : (
                  <span className="text-ink-soft"> — waiting for a decision</span>
                )}
                {rev.reply ? (
                  <div className="ml-4 text-ink-soft">
                    Contractor’s reply with this revision: <span className="text-ink">“{rev.reply}”</span>
                  </div>
                ) : null}
                {rev.acknowledgements?.length ? (
                  <ul className="ml-4 list-disc pl-4 text-xs text-ink-soft">
                    {rev.acknowledgements.map((a) => (
                      <li key={a.key}>
                        Warning acknowledged on {a.subject}: {a.message} —{" "}
                        <span className="text-ink">“{a.reason}”</span>
                      </li>
                    ))}
                  </ul>
                ) : null}
              </li>
            ))}
          </ol>
        )}
        {diffs.map((d) => (
          <div key={`${d.from}-${d.to}`} className="mt-4">
            <h3 className="text-sm font-semibold">
              What changed from revision {d.from} to {d.to}
            </h3>
            {d.changes.length === 0 ? (
              <p className="text-sm text-ink-soft">
                {survey
                  ? "Nothing in the readings, their flags or the files changed."
                  : "Nothing in the lab inputs, the results or the files changed."}
              </p>
            ) : (
              <table className="mt-1 text-sm">
                <thead className="text-left text-xs text-ink-soft">
                  <tr>
                    <th className="pr-4 font-medium">{survey ? "CML" : "Coupon"}</th>
                    <th className="pr-4 font-medium">Field</th>
                    <th className="pr-4 font-medium">Before</th>
                    <th className="font-medium">After</th>
                  </tr>
                </thead>
                <tbody>
                  {d.changes.map((c, i) => (
                    <tr key={i}>
                      <td className="pr-4">{c.subject}</td>
                      <td className="pr-4">{c.field}</td>
                      <td className="num pr-4 text-ink-soft line-through">{c.before}</td>
                      <td className="num font-medium">{c.after}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            )}
          </div>
        ))}
      </Card>

      <EngineeringCaution />

      {decides && submission.status === "submitted" ? (
        <Card title="Your decision">
          <Form method="post" className="space-y-4">
            <input type="hidden" name="version" value={submission.version} />
            {Object.keys(errors).filter((k) => k !== "form").length > 1 ? (
              <FormAlert tone="bad">
                {Object.keys(errors).filter((k) => k !== "form").length} things need your answer before this decision is
                recorded; each is marked below.
              </FormAlert>
            ) : null}
            {warnings.length ? (
              <fieldset className="space-y-3" data-testid="acknowledgements">
                <legend className="text-sm font-semibold">
                  Warnings to acknowledge before approving ({warnings.length})
                </legend>
                <p className="text-xs text-ink-faint">
                  Say for each why it does not stop approval (for example: “blank re-weighed by the lab, loss
                  confirmed”). Your reasons are kept with the approval and in the audit trail. Notes need no reason;
                  returning the submission needs none of these.
                </p>
                {warnings.map((w) => (
                  <div key={w.key} className="rounded-md border border-rule p-3">
                    <p className="mb-2 text-sm text-warn">
                      <span aria-hidden="true">▲ </span>
                      <span className="font-medium">
                        {w.subject.charAt(0).toUpperCase() + w.subject.slice(1)}:
                      </span>{" "}
                      {w.message}
                    </p>
                    {w.code === "below-required" ? <EngineeringCaution compact /> : null}
                    <TextField
                      label={`Why approve ${w.subject} despite this warning`}
                      name={ackFieldName(w.key)}
                      defaultValue={sent[ackFieldName(w.key)] ?? ""}
                      error={errors[ackFieldName(w.key)]}
                      maxLength={500}
                      autoComplete="off"
                    />
                  </div>
                ))}
              </fieldset>
            ) : null}
            <TextAreaField
              label="Comment to the contractor"
              name="comment"
              rows={3}
              defaultValue={sent.comment ?? ""}
              error={errors.comment}
              hint="Required to return the submission; optional when approving. It stays on the record."
            />
            <input type="hidden" name="confirm" value="off" />
            <CheckboxField
              name="confirm"
              value="on"
              defaultChecked={sent.confirm === "on"}
              error={errors.confirm}
              label={
                survey ? (
                  <>
                    I approve {cmlTags.length === 1 ? "the reading at CML" : `the ${cmlTags.length} readings at CMLs`}{" "}
                    {cmlTags.join(", ")} on {circuitTags.length === 1 ? "circuit" : "circuits"} {circuitTags.join(", ")}
                    : once approved they are permanent, enter each CML’s approved history and its circuit’s remaining
                    life, and can be changed only by opening a correction.
                  </>
                ) : (
                  <>
                    I approve the results of {results.length === 1 ? "coupon" : `${results.length} coupons`}{" "}
                    {results.map((r) => r.couponSerial).join(", ")} at {points.join(", ")}: once approved they are
                    permanent, enter each point’s approved history and its circuit’s rates, and can be changed only by
                    opening a correction.
                  </>
                )
              }
            />
            <div className="flex flex-wrap gap-3">
              <Button type="submit" name="intent" value="approve" disabled={busy}>
                Approve submission
              </Button>
              <Button type="submit" name="intent" value="return" variant="secondary" disabled={busy}>
                Return to the contractor
              </Button>
            </div>
            <p className="text-xs text-ink-faint">
              The tick and the reasons are needed to approve only; to return the submission a comment is enough.
            </p>
          </Form>
        </Card>
      ) : null}
      {decides && submission.status === "approved" && !openCorrectionRow ? (
        <Card title="Correct this approved submission">
          <Form method="post" className="space-y-3">
            <TextAreaField
              label="Reason for the correction"
              name="reason"
              rows={2}
              error={errors.reason}
              hint={
                survey
                  ? "For example: CML 12-CML-004 was read on the wrong elbow. The contractor edits a new revision; this survey stays in force until the correction is approved."
                  : "For example: the lab re-weighed coupon QCS-4107. The contractor edits a new revision; this submission stays in force until the correction is approved."
              }
            />
            <Button type="submit" name="intent" value="correct" variant="secondary" disabled={busy}>
              Open a correction
            </Button>
          </Form>
        </Card>
      ) : null}

      <Card title="Audit trail of this submission">
        {trail.length === 0 ? (
          <p className="text-sm text-ink-soft">No events yet.</p>
        ) : (
          <ol className="space-y-1 text-sm">
            {trail.map((t) => (
              <li key={t.id} className="num">
                {formatLocal(t.at, submission.timeZone)} · {t.actor} · {auditActionWords(t.action)}
                {t.reason ? <span className="text-ink-soft"> — {t.reason}</span> : null}
              </li>
            ))}
          </ol>
        )}
        {readsAudit ? (
          <p className="mt-2 text-xs">
            <Link to={`/audit?${new URLSearchParams({ type: "submission", id: submission.id })}`}>
              Full trail with before and after
            </Link>
          </p>
        ) : null}
      </Card>
    </div>
  );
}

function ResultCard({
  result: r,
  units,
  timeZone,
  history,
  attachments,
  flags,
}: {
  result: SubmissionResult;
  units: "si" | "us";
  timeZone: string;
  history: Array<{ removedAt: string; generalMmPerYear: number; pittingMmPerYear: number | null; serial: string }>;
  attachments: AttachmentView[];
  flags: ReviewFlag[];
}) {
  const c = r.computed;
  const calc = r.inputs.calculation;
  const lab = r.inputs.lab;
  // A coupon that cannot be rated adds no point to the trend, as it adds none to the history.
  const current = c.rate
    ? [
        {
          removedAt: r.removedAt,
          generalMmPerYear: c.rate.mmPerYear,
          pittingMmPerYear: c.pitting?.mmPerYear ?? null,
          serial: r.couponSerial,
          current: true,
        },
      ]
    : [];
  const trend = [...history.filter((h) => h.serial !== r.couponSerial), ...current].sort((a, b) =>
    a.removedAt.localeCompare(b.removedAt),
  );
  return (
    <Card title={`${r.pointTag} · coupon ${r.couponSerial}`}>
      <div className="grid gap-6 lg:grid-cols-2">
        <div>
          <h3 className="mb-2 text-sm font-semibold">Inputs</h3>
          <Facts
            items={[
              ["Circuit", r.circuitTag],
              ["Material", r.materialName],
              ["Mounting", `${r.mounting}${r.orientation ? `, ${r.orientation}` : ""}`],
              ["Installed", formatLocal(r.installedAt, timeZone)],
              [
                "Removed",
                `${formatLocal(r.removedAt, timeZone)} (${c.exposureDays.toFixed(1)} d, ${c.exposureHours.toFixed(0)} h)`,
              ],
              ["Coupon", `${describeGeometry(calc.geometry)}; exposed area ${c.areaCm2.toFixed(2)} cm²`],
              ["Density", `${calc.densityGcm3} g/cm³ — ${densitySourceLabel(calc.densitySource)}`],
              ["Initial mass", formatGrams(calc.initialMassG)],
              [
                "Coupon after cleaning",
                lab.couponMassesG.length
                  ? lab.couponMassesG.map((m) => `${m.toFixed(4)}`).join(" → ") + " g"
                  : formatGrams(lab.finalMassG),
              ],
              [
                "Blank",
                lab.blankInitialMassG
                  ? `${lab.blankInitialMassG.toFixed(4)} → ${lab.blankMassesG.map((m) => m.toFixed(4)).join(" → ")} g`
                  : "none",
              ],
              ["Cleaning method", lab.cleaningMethod || r.cleaningMethod || "not recorded"],
              ["Pit depths", lab.pitDepthsMm.length ? `${lab.pitDepthsMm.join(", ")} mm` : "none measured"],
              [
                "Pitting as removed",
                calc.pittingVisible === null || calc.pittingVisible === undefined
                  ? "not recorded"
                  : calc.pittingVisible
                    ? "visible"
                    : "not seen",
              ],
              ["Deposits at removal", r.removal.deposits || "none recorded"],
              ["Damage at removal", r.removal.damage || "none recorded"],
              ["Removal notes", r.removal.notes || "—"],
              ["Lab notes", lab.labNotes || r.labNotes || "—"],
            ]}
          />
        </div>
        <div>
          <h3 className="mb-2 text-sm font-semibold">Computed</h3>
          <Facts
            items={[
              ["Mass loss", `${formatGrams(c.massLoss.correctedG)} (${massLossMethodWords[c.massLoss.method]})`],
              [
                "Blank loss",
                c.massLoss.blankLossG === null
                  ? "—"
                  : c.massLoss.method === "cleaning-curve"
                    ? `${formatGrams(c.massLoss.blankLossG)} (not subtracted: the cleaning curve corrects for cleaning)`
                    : formatGrams(c.massLoss.blankLossG),
              ],
              [
                "General rate",
                c.rate
                  ? `${formatQuantity("rate", c.rate.mmPerYear, units)} · ${formatQuantity("rate", c.rate.mmPerYear, units === "si" ? "us" : "si")} · ${c.rate.mdd.toFixed(2)} mdd · ${c.rate.gPerM2PerHour.toFixed(4)} g/m²·h`
                  : `not determinable: ${c.notDeterminableReason ?? "see the flags"} No rate from this coupon enters the point's history.`,
              ],
              [
                "Severity, general",
                <Grade
                  key="g"
                  value={c.severity.general}
                  basis={c.severity.generalBasis}
                  emphasise={c.severity.worstKind === "general"}
                />,
              ],
              ["Pitting rate", c.pitting ? formatQuantity("rate", c.pitting.mmPerYear, units) : "—"],
              ["Pitting factor", formatPittingFactor(c.pitting?.factor)],
              [
                "Severity, pitting",
                c.severity.pitting ? (
                  <SeverityBadge key="p" value={c.severity.pitting} emphasise={c.severity.worstKind === "pitting"} />
                ) : (
                  "—"
                ),
              ],
              [
                "Basis",
                `${c.basis.formulaVersion}; ${c.version}; 8760-h year; mpy = mm/y ÷ 0.0254; bands ${c.basis.thresholds.general === "NACE SP0775" ? "NACE SP0775" : "owner’s"}`,
              ],
            ]}
          />
          {flags.length ? (
            <div className="mt-3">
              <h4 className="text-sm font-semibold">Quality flags</h4>
              <FlagList flags={flags} />
            </div>
          ) : (
            <p className="mt-3 text-sm text-ink-soft">No quality flags.</p>
          )}
        </div>
        <div className="lg:col-span-2">
          <h3 className="mb-2 text-sm font-semibold">History at {r.pointTag}</h3>
          <TrendChart points={trend} units={units} title={`Rates at ${r.pointTag}`} timeZone={timeZone} />
        </div>
      </div>
      <div className="mt-4 border-t border-rule pt-3">
        <h3 className="mb-2 text-sm font-semibold">Photos and lab sheet</h3>
        {attachments.length ? (
          <AttachmentGallery attachments={attachments} />
        ) : (
          <p className="text-sm text-ink-soft">No photos or lab sheet were attached to this coupon.</p>
        )}
      </div>
    </Card>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Review ${data?.submission.reference ?? ""} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
