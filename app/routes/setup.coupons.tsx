import { createColumnHelper } from "@tanstack/react-table";
import { useId, useState, type FormEvent } from "react";
import { Form, useLocation, useNavigation, useSubmit } from "react-router";
import { StatusBadge } from "~/components/badges";
import { Button, ButtonLink, buttonClass } from "~/components/button";
import { CsvProblems } from "~/components/csv-problems";
import { DataTable } from "~/components/data-table";
import { FormAlert, SelectField, TextAreaField, TextField } from "~/components/field";
import { Card, EmptyState, PageHeader } from "~/components/layout";
import { formFailure, useFormKey } from "~/components/form-failure";
import { COUPON_SHAPES, couponArea, MATERIALS } from "~/domain/index.ts";
import { actorOf } from "~/models/audit.server";
import { CSV_MAX_BYTES, CSV_MAX_ROWS, importCoupons, type CsvProblem } from "~/models/coupon-import.server";
import {
  couponsPage,
  couponStateFilters,
  couponStock,
  createCoupon,
  type CouponStateFilter,
} from "~/models/coupons.server";
import { pageNumberOf, Pager } from "~/components/pager";
import {
  COUPON_COLUMNS,
  geometryFieldError,
  materialName,
  geometryOf,
  shapeFields,
  type CouponShape,
} from "~/services/coupon-spec";
import { db } from "~/services/db.server";
import { redirectWithFlash } from "~/services/flash.server";
import { requireOwnerUser } from "~/services/guards.server";
import { requestIdOf } from "~/services/problem.server";
import { consumeLimit } from "~/services/rate-limit.server";
import { formAction, intentOf, invalidForm, pageLoad, readFormParts } from "~/services/respond.server";
import type { Route } from "./+types/setup.coupons";

// The single-coupon form and every CSV line are validated by couponSchema in
// services/coupon-spec.ts; the form's field names are the CSV's column names.

const couponPageSize = 100;

export async function loader(args: Route.LoaderArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  // State, search and page travel in the query string; the stock pages on the server.
  const url = new URL(args.request.url);
  const askedState = (url.searchParams.get("state") ?? "current") as CouponStateFilter;
  const state = couponStateFilters.includes(askedState) ? askedState : "current";
  const search = (url.searchParams.get("q") ?? "").trim().slice(0, 80);
  const [page, stock] = await Promise.all([
    couponsPage(db(), user.ownerId, { state, search }, { number: pageNumberOf(url), size: couponPageSize }),
    couponStock(db(), user.ownerId),
  ]);
  const coupons = page.items;
  return {
    state,
    search,
    total: page.total,
    number: page.number,
    size: page.size,
    coupons: coupons.map((c) => ({
      id: c.id,
      serial: c.serial,
      material_code: c.material_code,
      density_g_cm3: c.density_g_cm3,
      density_source: c.density_source,
      density_from_table: MATERIALS.some(
        (m) => m.key === c.material_code && m.densityGcm3 === c.density_g_cm3 && m.densitySource === c.density_source,
      ),
      shape: c.shape,
      length_mm: c.length_mm,
      width_mm: c.width_mm,
      thickness_mm: c.thickness_mm,
      diameter_mm: c.diameter_mm,
      hole_diameter_mm: c.hole_diameter_mm,
      exposed_ends: c.exposed_ends,
      area_cm2: c.area_cm2,
      initial_mass_g: c.initial_mass_g,
      balance_resolution_g: c.balance_resolution_g,
      lot: c.lot,
      certificate: c.certificate,
      status: c.status,
      where: c.point_tag ? `${c.point_tag} (${c.site_code})` : null,
    })),
    stock,
    limits: { rows: CSV_MAX_ROWS, megabytes: CSV_MAX_BYTES / 1_000_000 },
  };
}

export async function action(args: Route.ActionArgs) {
  const user = requireOwnerUser(args, "setUpSites");
  const { values, files } = await readFormParts(args.request);
  const intent = intentOf(values, ["createCoupon", "importCsv"] as const);
  const requestId = requestIdOf(args.context);

  if (intent === "createCoupon")
    return formAction(values, async () => {
      const r = await createCoupon(db(), user.ownerId, actorOf(user), values, requestId);
      return redirectWithFlash("/setup/coupons", {
        tone: "ok",
        message: `Coupon ${r.serial} added to your stock (exposed area ${r.areaCm2.toFixed(2)} cm²).`,
      });
    });

  await pageLoad(() => consumeLimit("uploadsPerUser", user.id));
  const file = files.file;
  if (file && file.size > CSV_MAX_BYTES) {
    const problems: CsvProblem[] = [
      { line: 1, column: null, message: `The file is larger than ${CSV_MAX_BYTES / 1_000_000} MB; split it.` },
    ];
    return invalidForm({ intent }, { file: problems[0].message }, { problems, csv: "" });
  }
  const text = file ? await file.text() : (values.csv ?? "");
  // The refused file's text comes back in the box so it can be corrected there.
  const kept = { intent, csv: text.length <= 200_000 ? text.replace(/^\uFEFF/, "") : "" };
  return formAction(kept, async () => {
    const r = await importCoupons(db(), user.ownerId, actorOf(user), text, requestId);
    return redirectWithFlash("/setup/coupons", {
      tone: "ok",
      message: `Imported ${r.count} coupon${r.count === 1 ? "" : "s"} into your stock (${r.serials.slice(0, 3).join(", ")}${r.count > 3 ? ", …" : ""}).`,
    });
  });
}

type Loader = Route.ComponentProps["loaderData"];
type CouponRow = Loader["coupons"][number];

const statusWords = { in_stock: "in stock", in_service: "in service", removed: "removed" } as const;
const shapeWords: Record<string, string> = { strip: "strip", disc: "disc", rod: "rod", "flush-disc": "flush disc" };
const fmt = (v: number | null | undefined) => (v === null || v === undefined ? "?" : String(Number(v)));

function dimensions(c: CouponRow): string {
  const hole = c.hole_diameter_mm > 0 ? `, hole ⌀${fmt(c.hole_diameter_mm)}` : "";
  switch (c.shape) {
    case "strip":
      return `${fmt(c.length_mm)} × ${fmt(c.width_mm)} × ${fmt(c.thickness_mm)} mm${hole}`;
    case "disc":
      return `⌀${fmt(c.diameter_mm)} × ${fmt(c.thickness_mm)} mm${hole}`;
    case "rod":
      return `⌀${fmt(c.diameter_mm)} × ${fmt(c.length_mm)} mm, ${c.exposed_ends} end${c.exposed_ends === 1 ? "" : "s"} wetted`;
    default:
      return `⌀${fmt(c.diameter_mm)} mm, one face`;
  }
}

/** "Carbon steel" for the table; the full name and UNS number in its tooltip. */
const materialTitle = (key: string) => {
  const m = MATERIALS.find((x) => x.key === key);
  return m ? `${m.name}${m.uns ? `, UNS ${m.uns}` : ""}` : key;
};

const col = createColumnHelper<CouponRow>();
const nowrap = (text: string) => <span className="whitespace-nowrap">{text}</span>;
const columns = [
  col.accessor("serial", {
    header: "Serial",
    cell: (c) => <span className="whitespace-nowrap font-medium">{c.getValue()}</span>,
  }),
  col.accessor((r) => `${statusWords[r.status]}${r.where ? ` at ${r.where}` : ""}`, {
    id: "status",
    header: "State",
    cell: (c) => (
      <span className="whitespace-nowrap">
        <StatusBadge status={stateTone[c.row.original.status]} label={statusWords[c.row.original.status]} />
        {c.row.original.where ? <span className="ml-1 text-xs text-ink-soft">at {c.row.original.where}</span> : null}
      </span>
    ),
  }),
  col.accessor((r) => materialName(r.material_code), {
    id: "material",
    header: "Material",
    cell: (c) => <span title={materialTitle(c.row.original.material_code)}>{nowrap(c.getValue())}</span>,
  }),
  col.accessor("density_g_cm3", {
    header: "Density",
    meta: { align: "right" },
    cell: (c) => (
      <span className="whitespace-nowrap" title={`Source: ${c.row.original.density_source}`}>
        {c.getValue().toFixed(3)} g/cm³{" "}
        <span className="rounded border border-rule px-1 text-[0.65rem] uppercase tracking-wide text-ink-faint">
          {c.row.original.density_from_table ? "table" : "stated"}
        </span>
      </span>
    ),
  }),
  col.accessor((r) => `${shapeWords[r.shape] ?? r.shape} ${dimensions(r)}`, {
    id: "shape",
    header: "Shape and size",
    cell: (c) => (
      <span className="whitespace-nowrap">
        <span className="text-ink-soft">{shapeWords[c.row.original.shape] ?? c.row.original.shape}</span>{" "}
        {dimensions(c.row.original)}
      </span>
    ),
  }),
  col.accessor((r) => r.area_cm2 ?? -1, {
    id: "area",
    header: "Exposed area",
    meta: { align: "right" },
    cell: (c) => nowrap(c.row.original.area_cm2 === null ? "—" : `${c.row.original.area_cm2.toFixed(2)} cm²`),
  }),
  col.accessor("initial_mass_g", {
    header: "Initial mass",
    meta: { align: "right" },
    cell: (c) => nowrap(`${c.getValue().toFixed(4)} g`),
  }),
  col.accessor("balance_resolution_g", {
    header: "Resolution",
    meta: { align: "right" },
    cell: (c) => nowrap(`${fmt(c.getValue())} g`),
  }),
  col.accessor("lot", { header: "Lot", cell: (c) => nowrap(c.getValue() || "—") }),
  col.accessor("certificate", { header: "Certificate", cell: (c) => nowrap(c.getValue() || "—") }),
];
const stateTone = { in_stock: "active", in_service: "in service", removed: "ended" } as const;

/** The exposed area as the user types, from the same spec and calculation library the server uses. */
function previewArea(f: Record<string, string>): { cm2?: number; problem?: string } {
  const shape = (COUPON_SHAPES as readonly string[]).includes(f.shape) ? (f.shape as CouponShape) : "strip";
  try {
    return { cm2: couponArea(geometryOf({ ...f, shape, hole_diameter_mm: f.hole_diameter_mm?.trim() || 0 })) };
  } catch (error) {
    return { problem: error instanceof RangeError ? geometryFieldError(error).message : (error as Error).message };
  }
}

export default function CouponStock({ loaderData, actionData }: Route.ComponentProps) {
  const { coupons, stock, limits, state: stateFilter, search, total, number, size } = loaderData;
  const navigation = useNavigation();
  const busy = navigation.state === "submitting";
  const filterId = useId();
  const location = useLocation();
  const submit = useSubmit();

  const single = formFailure(actionData, { intent: "createCoupon" });
  const errors = single.errors;
  const values: Record<string, string | undefined> = (single.sent ? actionData?.values : undefined) ?? {};
  const importFailure = formFailure(actionData, { intent: "importCsv" });
  const imported = importFailure.sent
    ? {
        problems: (actionData?.details?.problems ?? []) as CsvProblem[],
        csv: actionData?.values?.csv ?? "",
      }
    : undefined;
  const addKey = useFormKey();
  const shown = coupons;
  const stateSelect = (
    <Form method="get" className="flex flex-wrap items-end gap-2" role="search" aria-label="Find coupons">
      <div>
        <label htmlFor={filterId} className="block text-xs font-medium text-ink-soft">
          State
        </label>
        <select
          id={filterId}
          name="state"
          defaultValue={stateFilter}
          onChange={(e) => submit(e.currentTarget.form)}
          className="mt-0.5 rounded-md border border-rule bg-white px-2.5 py-1.5 text-sm"
        >
          <option value="current">In stock or in service ({stock.in_stock + stock.in_service})</option>
          <option value="">All states ({stock.in_stock + stock.in_service + stock.removed})</option>
          <option value="in_stock">In stock ({stock.in_stock})</option>
          <option value="in_service">In service ({stock.in_service})</option>
          <option value="removed">Removed ({stock.removed})</option>
        </select>
      </div>
      <div>
        <label htmlFor={`${filterId}-q`} className="block text-xs font-medium text-ink-soft">
          Serial, lot, certificate, material or point
        </label>
        <input
          id={`${filterId}-q`}
          name="q"
          defaultValue={search}
          maxLength={80}
          className="mt-0.5 rounded-md border border-rule bg-white px-2.5 py-1.5 text-sm"
        />
      </div>
      <Button type="submit" variant="secondary">
        Show
      </Button>
    </Form>
  );
  return (
    <div className="space-y-8">
      <PageHeader
        title="Coupon stock"
        question="Which coupons are ready to install, which are in service, and what was each one weighed and measured at?"
        actions={
          <>
            <a href="/setup/coupons.csv" download className={buttonClass("secondary", "no-underline")}>
              Download CSV template
            </a>
            <ButtonLink to="/setup">Set-up</ButtonLink>
          </>
        }
      >
        <p className="mt-1 text-xs text-ink-faint">
          {stock.in_stock} in stock · {stock.in_service} in service · {stock.removed} removed
        </p>
      </PageHeader>

      <section aria-labelledby="stock-heading" className="space-y-3">
        <h2 id="stock-heading" className="text-lg font-semibold">
          Coupons
        </h2>
        <DataTable
          data={shown}
          columns={columns}
          caption="Coupon stock"
          searchLabel="Search serial, material, lot…"
          initialSorting={[{ id: "serial", desc: false }]}
          toolbar={stateSelect}
          empty={
            stock.in_stock + stock.in_service + stock.removed === 0 ? (
              <EmptyState title="No coupons in your stock yet">
                Contractors can install only coupons registered here. Add a coupon with the form below, or import a
                batch from the supplier’s data: download the CSV template, fill one line per coupon, and import it
                further down.
              </EmptyState>
            ) : (
              <EmptyState
                title={`No coupons ${statusWords[stateFilter as keyof typeof statusWords] ?? "in stock or in service"}${search ? ` matching “${search}”` : ""}`}
                action={<div className="inline-block text-left">{stateSelect}</div>}
              >
                Choose “All states” to see the whole stock, including removed coupons.
              </EmptyState>
            )
          }
        />
        <Pager total={total} number={number} size={size} search={location.search} what="coupons" />
        {coupons.length > 0 ? (
          <p className="text-xs text-ink-faint">
            Density: “table” is the material’s value from the materials table (ASTM G1 appendix); “stated” is a value
            entered with its own source, shown when you point at it. Each coupon keeps the density it was registered
            with, so its rates can be re-derived later.
          </p>
        ) : null}
      </section>

      <div className="grid gap-6 xl:grid-cols-2">
        <AddCoupon key={addKey} values={values} errors={errors} busy={busy} />

        <Card title="Import coupons from CSV">
          <div className="space-y-3 text-sm text-ink-soft">
            <p>
              One coupon per line, comma-separated, with a header line of the column names below (any order; optional
              columns may be left out). Numbers take a decimal <strong>point</strong>. Quote a value that contains a
              comma. UTF-8 text; a byte-order mark and Windows line ends are fine. Up to {limits.rows} coupons or{" "}
              {limits.megabytes} MB per file.
            </p>
            <p>
              The import is all or nothing: if any line has a problem, nothing is added and every problem is listed with
              its line number.
            </p>
          </div>
          {imported ? <CsvProblems problems={imported.problems} textKept={Boolean(imported.csv)} /> : null}
          <Form
            method="post"
            encType="multipart/form-data"
            className="mt-4 space-y-4"
            key={imported ? `again-${imported.problems.length}` : "fresh"}
          >
            <input type="hidden" name="intent" value="importCsv" />
            <div className="space-y-1">
              <label htmlFor="csv-file" className="block text-sm font-medium text-ink">
                CSV file
              </label>
              <input
                id="csv-file"
                type="file"
                name="file"
                accept=".csv,text/csv,text/plain"
                className="block w-full text-sm file:mr-3 file:rounded-md file:border file:border-rule file:bg-panel file:px-3 file:py-1.5 file:text-sm"
              />
            </div>
            <TextAreaField
              label="…or paste the CSV text"
              name="csv"
              rows={6}
              defaultValue={imported?.csv}
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
            <table className="mt-2 min-w-full text-sm">
              <caption className="sr-only">CSV columns for coupons</caption>
              <thead className="text-left text-xs uppercase tracking-wide text-ink-soft">
                <tr>
                  <th scope="col" className="py-1 pr-3">
                    Column
                  </th>
                  <th scope="col" className="py-1 pr-3">
                    Needed
                  </th>
                  <th scope="col" className="py-1">
                    What it holds
                  </th>
                </tr>
              </thead>
              <tbody>
                {COUPON_COLUMNS.map((c) => (
                  <tr key={c.name} className="border-t border-rule align-top">
                    <td className="py-1 pr-3 font-mono text-xs">{c.name}</td>
                    <td className="py-1 pr-3">{c.required ? "always" : "when it applies"}</td>
                    <td className="py-1 text-ink-soft">{c.about}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          </details>
        </Card>
      </div>
    </div>
  );
}

/** The single-coupon form; its dimension fields follow the chosen shape, and the area is previewed as you type. */
function AddCoupon({
  values,
  errors,
  busy,
}: {
  values: Record<string, string | undefined>;
  errors: Record<string, string | undefined>;
  busy: boolean;
}) {
  const errorCount = Object.values(errors).filter(Boolean).length;
  const [fields, setFields] = useState<Record<string, string>>(() => ({
    shape: values.shape ?? "strip",
    material: values.material ?? "carbon-steel",
    ...(Object.fromEntries(Object.entries(values).filter(([, v]) => typeof v === "string")) as Record<string, string>),
  }));
  const onFormChange = (e: FormEvent<HTMLFormElement>) => {
    const fd = new FormData(e.currentTarget);
    setFields(Object.fromEntries([...fd].filter((x): x is [string, string] => typeof x[1] === "string")));
  };
  const shape = ((COUPON_SHAPES as readonly string[]).includes(fields.shape) ? fields.shape : "strip") as CouponShape;
  const material = MATERIALS.find((m) => m.key === fields.material) ?? MATERIALS[0];
  const area = previewArea(fields);

  const dimensionField = (name: string, label: string, hint?: string) =>
    (shapeFields(shape) as string[]).includes(name) ? (
      <TextField
        key={name}
        label={label}
        name={name}
        inputMode="decimal"
        unit="mm"
        defaultValue={values[name]}
        error={errors[name]}
        hint={hint}
        autoComplete="off"
      />
    ) : null;

  return (
    <Card title="Add a coupon">
      {errorCount > 0 ? (
        <div className="mb-3">
          <FormAlert>
            Nothing was saved: {errorCount === 1 ? "one field needs" : `${errorCount} fields need`} attention.
          </FormAlert>
        </div>
      ) : null}
      <Form method="post" noValidate className="space-y-4" onChange={onFormChange}>
        <input type="hidden" name="intent" value="createCoupon" />
        <div className="grid gap-4 sm:grid-cols-2">
          <TextField
            label="Serial"
            name="serial"
            defaultValue={values.serial}
            error={errors.serial}
            hint="As stamped, e.g. CS-24001"
            autoComplete="off"
          />
          <SelectField
            label="Material"
            name="material"
            defaultValue={values.material ?? "carbon-steel"}
            error={errors.material}
          >
            {MATERIALS.map((m) => (
              <option key={m.key} value={m.key}>
                {m.name}
                {m.uns ? ` (UNS ${m.uns})` : ""}
              </option>
            ))}
          </SelectField>
          <SelectField label="Shape" name="shape" defaultValue={values.shape ?? "strip"} error={errors.shape}>
            {COUPON_SHAPES.map((s) => (
              <option key={s} value={s}>
                {s === "strip"
                  ? "Strip with mounting hole"
                  : s === "disc"
                    ? "Disc with centre hole"
                    : s === "rod"
                      ? "Rod"
                      : "Flush disc (one face wetted)"}
              </option>
            ))}
          </SelectField>
          {dimensionField("length_mm", "Length")}
          {dimensionField("width_mm", "Width")}
          {dimensionField("diameter_mm", "Diameter")}
          {dimensionField("thickness_mm", "Thickness")}
          {dimensionField("hole_diameter_mm", "Hole diameter", "0 or empty = no hole")}
          {shapeFields(shape).includes("exposed_ends") ? (
            <SelectField
              label="Wetted end faces"
              name="exposed_ends"
              defaultValue={values.exposed_ends ?? "1"}
              error={errors.exposed_ends}
            >
              <option value="0">None (both ends shielded)</option>
              <option value="1">One (the tip)</option>
              <option value="2">Both</option>
            </SelectField>
          ) : null}
        </div>
        <p className="text-sm text-ink-soft" aria-live="polite">
          Exposed area:{" "}
          {area.cm2 !== undefined ? (
            <strong className="num text-ink">{area.cm2.toFixed(2)} cm²</strong>
          ) : shapeFields(shape).every((f) => f === "hole_diameter_mm" || fields[f]?.trim()) ? (
            <span className="text-bad">{area.problem}</span>
          ) : (
            <span className="text-ink-faint">appears when the dimensions are in</span>
          )}
        </p>
        <div className="grid gap-4 sm:grid-cols-2">
          <TextField
            label="Initial mass"
            name="initial_mass_g"
            inputMode="decimal"
            unit="g"
            defaultValue={values.initial_mass_g}
            error={errors.initial_mass_g}
            hint="Before exposure, to 0.1 mg (e.g. 11.8342)"
            autoComplete="off"
          />
          <TextField
            label="Balance resolution"
            name="balance_resolution_g"
            inputMode="decimal"
            unit="g"
            defaultValue={values.balance_resolution_g ?? "0.0001"}
            error={errors.balance_resolution_g}
            hint="The smallest step the balance shows"
          />
          <TextField
            label="Density (only to override)"
            name="density_g_cm3"
            inputMode="decimal"
            unit="g/cm³"
            placeholder={String(material.densityGcm3)}
            defaultValue={values.density_g_cm3}
            error={errors.density_g_cm3}
            hint={`Empty = ${material.densityGcm3} g/cm³ from the material table (${material.densitySource}).`}
          />
          <TextField
            label="Source of that density"
            name="density_source"
            defaultValue={values.density_source}
            error={errors.density_source}
            hint="Needed when you override, e.g. the mill certificate"
          />
          <TextField label="Lot" name="lot" defaultValue={values.lot} error={errors.lot} autoComplete="off" />
          <TextField
            label="Certificate"
            name="certificate"
            defaultValue={values.certificate}
            error={errors.certificate}
            autoComplete="off"
          />
        </div>
        <Button type="submit" disabled={busy}>
          Add coupon
        </Button>
      </Form>
    </Card>
  );
}

export const meta: Route.MetaFunction = () => [{ title: "Coupon stock · Set-up · Wallcast" }];

export { RouteErrorBoundary as ErrorBoundary } from "~/components/route-error";
export { keepRetryAfter as headers } from "~/services/retry-after";
