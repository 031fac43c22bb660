import { CsvColumns, CsvFileInput } from "~/components/csv-problems";
import { data, Form, Link, useNavigation } from "react-router";
import { Button } from "~/components/button";
import { FormAlert } from "~/components/field";
import { Card, PageHeader } from "~/components/layout";
import { importLabCsv, LAB_CSV_COLUMNS, type ImportRefusal } from "~/models/lab-import.server";
import { db } from "~/services/db.server";
import { requireCapability } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { formAction, pageLoad, readFormParts } from "~/services/respond.server";
import type { Route } from "./+types/lab-import";

const MAX_BYTES = 2 * 1024 * 1024;

export function loader(args: Route.LoaderArgs) {
  requireCapability(args, "recordWork");
  return { columns: LAB_CSV_COLUMNS.map((c) => ({ name: c.name, help: c.help })) };
}

export async function action(args: Route.ActionArgs) {
  const user = requireCapability(args, "recordWork");
  await pageLoad(() => consumeLimit("uploadsPerUser", user.id));
  const length = Number(args.request.headers.get("Content-Length") ?? 0);
  if (length > MAX_BYTES + 10_000)
    return data({ fileError: "The file is larger than 2 MB; split it into several imports." }, { status: 413 });
  const file = (await readFormParts(args.request)).files.file;
  if (!file) return data({ fileError: "Choose a CSV file to import." }, { status: 400 });
  if (file.size > MAX_BYTES)
    return data({ fileError: "The file is larger than 2 MB; split it into several imports." }, { status: 413 });
  const text = await file.text();
  if (text.includes("\u0000")) return data({ fileError: `${file.name} is not a text (CSV) file.` }, { status: 415 });
  return formAction({ fileName: file.name }, async () => ({
    fileName: file.name,
    imported: await importLabCsv(db(), user, text, requestIdOf(args.context)),
  }));
}

export default function LabImport({ loaderData, actionData }: Route.ComponentProps) {
  const busy = useNavigation().state === "submitting";
  const refused = actionData && "details" in actionData ? (actionData.details as ImportRefusal | undefined) : undefined;
  const result =
    actionData && "imported" in actionData
      ? { ok: true as const, ...actionData.imported }
      : refused
        ? { ok: false as const, ...refused }
        : null;
  const fileError = actionData && "fileError" in actionData ? actionData.fileError : null;
  return (
    <div className="max-w-5xl space-y-6">
      <PageHeader
        title="Import lab results"
        question="Bring a lab's weighings for several removed coupons in one file. The whole file is checked first; if any row has a problem, nothing is saved."
        actions={<Link to="/pulls">Back to the pull schedule</Link>}
      />
      <Card title="1. Fill in the template">
        <p className="text-sm text-ink-soft">
          One row per removed coupon. Masses in grams, depths in millimetres, a point as the decimal separator.
          Importing the same rows again changes nothing; changed numbers update the coupon’s result in your draft
          submission.
        </p>
        <p className="mt-2">
          <a href="/lab-import/template.csv" download>
            Download the template (CSV)
          </a>
        </p>
        <CsvColumns columns={loaderData.columns} />
      </Card>
      <Card title="2. Import the file">
        <Form method="post" encType="multipart/form-data" className="flex flex-wrap items-end gap-3">
          <CsvFileInput error={fileError} />
          <Button type="submit" disabled={busy}>
            {busy ? "Checking…" : "Check and import"}
          </Button>
        </Form>
      </Card>
      {result ? (
        <Card
          title={
            result.ok
              ? `Imported ${actionData && "imported" in actionData ? actionData.fileName : ""}`
              : "Nothing was imported"
          }
        >
          {result.notes.length ? (
            <ul className="mb-3 list-disc pl-5 text-xs text-ink-soft">
              {result.notes.map((n) => (
                <li key={n}>{n}</li>
              ))}
            </ul>
          ) : null}
          {result.ok ? (
            <>
              <FormAlert tone="ok">
                {result.rows.filter((r) => r.status === "saved").length} result(s) saved,{" "}
                {result.rows.filter((r) => r.status === "unchanged").length} already imported and unchanged.
              </FormAlert>
              <table className="mt-3 text-sm">
                <thead className="text-left text-xs text-ink-soft">
                  <tr>
                    <th className="pr-4 font-medium">Line</th>
                    <th className="pr-4 font-medium">Coupon</th>
                    <th className="pr-4 font-medium">Result</th>
                    <th className="font-medium">Submission</th>
                  </tr>
                </thead>
                <tbody>
                  {result.rows.map((r) => (
                    <tr key={r.line}>
                      <td className="num pr-4">{r.line}</td>
                      <td className="pr-4">{r.serial}</td>
                      <td className="pr-4">{r.status === "saved" ? "saved" : "unchanged (already imported)"}</td>
                      <td>
                        <Link to={`/submissions/${r.submissionId}`}>open the draft submission</Link>
                      </td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </>
          ) : (
            <>
              <FormAlert>
                {result.problems.length} problem(s) found. Correct them in the file and import it again; no row was
                saved.
              </FormAlert>
              <table className="mt-3 text-sm" aria-label="Problems by line and column">
                <thead className="text-left text-xs text-ink-soft">
                  <tr>
                    <th className="pr-4 font-medium">Line</th>
                    <th className="pr-4 font-medium">Column</th>
                    <th className="font-medium">Problem</th>
                  </tr>
                </thead>
                <tbody>
                  {result.problems.map((p, i) => (
                    <tr key={i} className="align-top">
                      <td className="num pr-4">{p.line}</td>
                      <td className="pr-4 font-mono text-xs">{p.column}</td>
                      <td>{p.message}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </>
          )}
        </Card>
      ) : null}
    </div>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Import lab results · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
export { keepRetryAfter as headers } from "~/services/retry-after";
