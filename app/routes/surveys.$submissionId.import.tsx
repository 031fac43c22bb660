import { CsvColumns, CsvFileInput } from "~/components/csv-problems";
import { data, Form, Link, useNavigation } from "react-router";
import { Button } from "~/components/button";
import { FormAlert } from "~/components/field";
import { Card, PageHeader } from "~/components/layout";
import {
  getSurvey,
  importSurveyCsv,
  SURVEY_CSV_COLUMNS,
  SURVEY_CSV_MAX_BYTES,
  type SurveyRowProblem,
} from "~/models/thickness-surveys.server";
import { db } from "~/services/db.server";
import { requireCapability, requireUuid } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { formAction, pageLoad, readFormParts } from "~/services/respond.server";
import type { Route } from "./+types/surveys.$submissionId.import";

async function load(args: Route.LoaderArgs | Route.ActionArgs) {
  const user = requireCapability(args, "recordWork");
  const id = requireUuid(args.params.submissionId);
  const survey = await pageLoad(() => getSurvey(db(), user, id));
  return {
    user,
    survey: { id: survey.id, reference: survey.reference, editable: survey.editable, status: survey.status },
  };
}

export async function loader(args: Route.LoaderArgs) {
  const { survey } = await load(args);
  return { survey, columns: SURVEY_CSV_COLUMNS.map((c) => ({ name: c.name, help: c.help })) };
}

const tooLarge = "The file is larger than 2 MB; split it into several imports.";

export async function action(args: Route.ActionArgs) {
  const { user, survey } = await load(args);
  await pageLoad(() => consumeLimit("uploadsPerUser", user.id));
  const length = Number(args.request.headers.get("Content-Length") ?? 0);
  if (length > SURVEY_CSV_MAX_BYTES + 10_000) return data({ fileError: tooLarge }, { status: 413 });
  const file = (await readFormParts(args.request)).files.file;
  if (!file) return data({ fileError: "Choose a CSV file to import." }, { status: 400 });
  if (file.size > SURVEY_CSV_MAX_BYTES) return data({ fileError: tooLarge }, { status: 413 });
  const text = await file.text();
  if (text.includes("\u0000")) return data({ fileError: `${file.name} is not a text (CSV) file.` }, { status: 415 });
  return formAction({ fileName: file.name }, async () => ({
    fileName: file.name,
    imported: await importSurveyCsv(db(), user, survey.id, text, requestIdOf(args.context)),
  }));
}

export default function SurveyImport({ loaderData, actionData }: Route.ComponentProps) {
  const { survey, columns } = loaderData;
  const busy = useNavigation().state === "submitting";
  const problems =
    actionData && "details" in actionData
      ? ((actionData.details as { problems?: SurveyRowProblem[] } | undefined)?.problems ?? [])
      : [];
  const formError = actionData && "errors" in actionData ? actionData.errors?.file : undefined;
  const fileError = actionData && "fileError" in actionData ? actionData.fileError : null;
  const imported = actionData && "imported" in actionData ? actionData.imported : null;
  return (
    <div className="max-w-5xl space-y-6">
      <PageHeader
        title={`Import readings · ${survey.reference}`}
        question="Bring the readings of several CMLs from one file. The whole file is checked first; if any row has a problem, nothing is saved."
        actions={<Link to={`/surveys/${survey.id}`}>Back to the survey</Link>}
      />
      {!survey.editable ? (
        <FormAlert tone="warn">This survey is {survey.status}; its readings can no longer change.</FormAlert>
      ) : null}
      <Card title="1. Fill in the template">
        <p className="text-sm text-ink-soft">
          One row per CML, by its tag; readings in millimetres with a point as the decimal mark; dates as YYYY-MM-DD
          (the site’s day). Rows you leave without readings change nothing; importing the same file again changes
          nothing.
        </p>
        <p className="mt-2">
          <a href={`/surveys/${survey.id}/template.csv`} download>
            Download the template for this survey (CSV)
          </a>
        </p>
        <CsvColumns columns={columns} />
      </Card>
      <Card title="2. Import the file">
        <Form method="post" encType="multipart/form-data" className="flex flex-wrap items-end gap-3">
          <CsvFileInput error={fileError} />
          <Button type="submit" disabled={busy || !survey.editable}>
            {busy ? "Checking…" : "Check and import"}
          </Button>
        </Form>
      </Card>
      {imported ? (
        <FormAlert tone="ok">
          {imported.saved} reading(s) saved, {imported.unchanged} already imported and unchanged.{" "}
          <Link to={`/surveys/${survey.id}`}>Open the survey</Link> to check the flags and submit it.
        </FormAlert>
      ) : null}
      {formError ? (
        <Card title="Nothing was imported">
          <FormAlert>{formError}</FormAlert>
          {problems.length ? (
            <div className="mt-3 overflow-x-auto">
              <table className="stack-table text-sm" aria-label="Problems by line and column">
                <thead className="text-left text-xs text-ink-soft">
                  <tr>
                    <th className="pr-4 font-medium">Line</th>
                    <th className="pr-4 font-medium">Column</th>
                    <th className="font-medium">Problem</th>
                  </tr>
                </thead>
                <tbody>
                  {problems.map((p, i) => (
                    <tr key={i} className="align-top">
                      <td data-label="Line" className="num pr-4">
                        {p.line}
                      </td>
                      <td data-label="Column" className="pr-4 font-mono text-xs">
                        {p.column}
                      </td>
                      <td data-label="Problem">{p.message}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
          ) : null}
        </Card>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = ({ data }) => [
  { title: `Import readings ${data?.survey.reference ?? ""} · Wallcast` },
];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
export { keepRetryAfter as headers } from "~/services/retry-after";
