import { Form, useNavigation } from "react-router";
import { Button, ButtonLink, buttonClass } from "~/components/button";
import { CsvProblems, type CsvProblemView } from "~/components/csv-problems";
import { TextAreaField } from "~/components/field";
import { formFailure } from "~/components/form-failure";
import { Card, PageHeader } from "~/components/layout";
import { actorOf } from "~/models/audit.server";
import { CSV_MAX_BYTES, CSV_MAX_ROWS } from "~/models/coupon-import.server";
import {
  CML_CSV_COLUMNS,
  DESIGN_CSV_COLUMNS,
  importCircuitDesign,
  importCmls,
  type SiteImportResult,
} from "~/models/design-import.server";
import { getSetupSite } from "~/models/sites.server";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { notFound, requireOwnerUser, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { formAction, intentOf, invalidForm, pageLoad, readFormParts } from "~/services/respond.server";
import type { Route } from "./+types/setup.sites.$siteId.import";

// Each file is checked line by line by its import in models/design-import.server.ts with the
// rules of the circuit and CML forms (circuitSchema, cmlSchema).

const intents = ["importDesign", "importCmls"] as const;

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const siteId = requireUuid(args.params.siteId);
  const site = await getSetupSite(db(), user.ownerId, siteId);
  if (!site) notFound();
  return {
    site: { id: site.id, name: site.name, code: site.code },
    design: DESIGN_CSV_COLUMNS,
    cml: CML_CSV_COLUMNS,
    limits: { rows: CSV_MAX_ROWS, megabytes: CSV_MAX_BYTES / 1_000_000 },
  };
}

const sayResult = (r: SiteImportResult, what: string) =>
  r.created.length === 0 && r.updated.length === 0
    ? `Nothing had changed: every ${what} in the file is as it was (${r.unchanged} checked).`
    : `Imported: ${r.created.length} ${what}(s) added, ${r.updated.length} changed, ${r.unchanged} unchanged.`;

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const siteId = requireUuid(args.params.siteId);
  // Another owner's site is a 404 whatever the form says.
  if (!(await getSetupSite(db(), user.ownerId, siteId))) notFound();
  const { values, files } = await readFormParts(args.request);
  const intent = intentOf(values, intents);
  await pageLoad(() => consumeLimit("uploadsPerUser", user.id));
  const file = files.file;
  if (file && file.size > CSV_MAX_BYTES) {
    const problems = [
      { line: 1, column: null, message: `The file is larger than ${CSV_MAX_BYTES / 1_000_000} MB; split it.` },
    ];
    return invalidForm({ intent }, { file: problems[0].message }, { problems, csv: "" });
  }
  const text = file ? await file.text() : (values.csv ?? "");
  // The refused file's text comes back in the box so it can be corrected there.
  const kept = { intent, csv: text.length <= 200_000 ? text.replace(/^\uFEFF/, "") : "" };
  const conn = db();
  const actor = actorOf(user);
  const requestId = requestIdOf(args.context);
  return formAction(kept, async () => {
    if (intent === "importDesign") {
      const r = await importCircuitDesign(conn, user.ownerId, actor, siteId, text, requestId);
      return redirectWithFlash(`/setup/sites/${siteId}#circuits`, { tone: "ok", message: sayResult(r, "circuit") });
    }
    const r = await importCmls(conn, user.ownerId, actor, siteId, text, requestId);
    return redirectWithFlash(`/setup/sites/${siteId}/import`, { tone: "ok", message: sayResult(r, "CML") });
  });
}

type Loader = Route.ComponentProps["loaderData"];

export default function SiteImport({ loaderData, actionData }: Route.ComponentProps) {
  const { site, design, cml, limits } = loaderData;
  const busy = useNavigation().state === "submitting";
  return (
    <div className="space-y-8">
      <PageHeader
        title={
          <>
            Import set-up data <span className="text-ink-faint">· {site.code}</span>
          </>
        }
        question="Which circuits' design data and which CMLs should come in from a spreadsheet?"
        actions={<ButtonLink to={`/setup/sites/${site.id}`}>{site.name}</ButtonLink>}
      >
        <p className="mt-1 text-sm text-ink-soft">
          One line per circuit or CML, comma-separated, with a header line of the column names (any order; optional
          columns may be left out). Numbers take a decimal <strong>point</strong>; SI units as the column names say. Up
          to {limits.rows} lines or {limits.megabytes} MB per file. Each import is all or nothing: if any line has a
          problem, nothing is imported and every problem is listed with its line and column. Importing the same file
          again changes nothing.
        </p>
      </PageHeader>
      <div className="grid gap-6 xl:grid-cols-2">
        <ImportCard
          intent="importDesign"
          title="circuit design data"
          intro="A line per circuit, found by its tag; a new tag adds the circuit to the unit named. An empty cell empties the field, as on the circuit form; diameter and wall left empty come from the NPS and schedule."
          template="/setup/circuit-design-template.csv"
          columns={design}
          actionData={actionData}
          busy={busy}
        />
        <ImportCard
          intent="importCmls"
          title="CMLs"
          intro="A line per CML, found by its tag (unique across your sites) on a circuit of this site; a new tag adds the CML. Add the circuits first."
          template="/setup/cml-template.csv"
          columns={cml}
          actionData={actionData}
          busy={busy}
        />
      </div>
    </div>
  );
}

function ImportCard({
  intent,
  title,
  intro,
  template,
  columns,
  actionData,
  busy,
}: {
  intent: (typeof intents)[number];
  title: string;
  intro: string;
  template: string;
  columns: Loader["design"];
  actionData: Route.ComponentProps["actionData"];
  busy: boolean;
}) {
  const failure = formFailure(actionData, { intent });
  const problems = failure.sent ? ((actionData?.details?.problems ?? []) as CsvProblemView[]) : null;
  const csv = failure.sent ? (actionData?.values?.csv ?? "") : "";
  return (
    <Card title={`Import ${title} from CSV`}>
      <p className="text-sm text-ink-soft">{intro}</p>
      <p className="mt-2">
        <a href={template} className={buttonClass("secondary")} download>
          Download the {title} template
        </a>
      </p>
      {problems ? <CsvProblems problems={problems} textKept={csv !== ""} id={`${intent}-problems`} /> : null}
      <Form
        method="post"
        encType="multipart/form-data"
        className="mt-4 space-y-4"
        key={problems ? `again-${problems.length}` : "fresh"}
      >
        <input type="hidden" name="intent" value={intent} />
        <div className="space-y-1">
          <label htmlFor={`${intent}-file`} className="block text-sm font-medium text-ink">
            CSV file
          </label>
          <input
            id={`${intent}-file`}
            type="file"
            name="file"
            accept=".csv,text/csv,text/plain"
            className="block w-full text-sm file:mr-3 file:rounded-md file:border file:border-rule file:bg-panel file:px-3 file:py-1.5 file:text-sm touch:file:min-h-11"
          />
        </div>
        <TextAreaField
          label="…or paste the CSV text"
          name="csv"
          rows={5}
          defaultValue={csv}
          className="font-mono text-xs"
          spellCheck={false}
          hint="Used when no file is chosen."
        />
        <Button type="submit" disabled={busy}>
          Check and import
        </Button>
      </Form>
      <details className="mt-4 text-sm">
        <summary className="cursor-pointer font-medium text-ink">The columns</summary>
        <dl className="mt-2 space-y-1">
          {columns.map((c) => (
            <div key={c.name}>
              <dt className="inline font-mono text-xs">{c.name}</dt>
              <dd className="inline text-ink-soft">
                {" "}
                — {c.what}
                {c.required ? " (needed)" : ""}
              </dd>
            </div>
          ))}
        </dl>
      </details>
    </Card>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Import · ${data?.site.name ?? "Site"} · Set-up · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
