import { z } from "zod";
import {
  COUPON_SHAPES,
  DENSITY_SOURCE_LABEL,
  MATERIALS,
  couponArea,
  findMaterial,
  type CouponGeometry,
} from "../domain/index.ts";
import {
  blank,
  cap,
  readDecimal,
  optionalDecimal,
  optionalText,
  requiredDecimal,
  requiredText,
  type FormInput,
} from "./form-fields";

/**
 * The coupon spec: the columns of the coupon form and CSV, which dimensions each shape
 * needs, the mapping to the calculation library's geometry, and the schema. Pure, so the
 * set-up page, the lab page, the CSV import and the server share one copy.
 */

export type CouponShape = (typeof COUPON_SHAPES)[number];

/**
 * The coupon columns, shared by the single-coupon form (field names) and the CSV
 * import (header), with units in the names so a spreadsheet says what it holds.
 */
export const COUPON_COLUMNS = [
  { name: "serial", required: true, about: "The serial stamped on the coupon; unique in your stock." },
  {
    name: "material",
    required: true,
    about: `A material key (${MATERIALS.map((m) => m.key).join(", ")}) or its UNS number.`,
  },
  { name: "shape", required: true, about: "strip, disc, rod or flush-disc." },
  { name: "length_mm", required: false, about: "Strip and rod: length in mm." },
  { name: "width_mm", required: false, about: "Strip: width in mm." },
  { name: "thickness_mm", required: false, about: "Strip and disc: thickness in mm." },
  { name: "diameter_mm", required: false, about: "Disc, rod and flush disc: diameter in mm." },
  {
    name: "hole_diameter_mm",
    required: false,
    about: "Strip and disc: mounting-hole diameter in mm; empty or 0 = no hole.",
  },
  { name: "exposed_ends", required: false, about: "Rod: how many end faces are wetted, 0, 1 or 2." },
  { name: "initial_mass_g", required: true, about: "Mass before exposure in g, to 0.1 mg (4 decimals at most)." },
  { name: "balance_resolution_g", required: false, about: "Resolution of the balance in g; empty = 0.0001." },
  {
    name: "density_g_cm3",
    required: false,
    about: "Only to override the material’s density, in g/cm³; then say where it comes from.",
  },
  {
    name: "density_source",
    required: false,
    about: "Where an overriding density comes from, e.g. the mill certificate.",
  },
  { name: "lot", required: false, about: "Manufacturing lot." },
  { name: "certificate", required: false, about: "Certificate or traceability reference." },
] as const;
export type CouponColumn = (typeof COUPON_COLUMNS)[number]["name"];

/** Which dimensions each shape needs (the rest must stay empty). */
const SHAPE_FIELDS: Record<CouponShape, { needs: CouponColumn[]; may: CouponColumn[] }> = {
  strip: { needs: ["length_mm", "width_mm", "thickness_mm"], may: ["hole_diameter_mm"] },
  disc: { needs: ["diameter_mm", "thickness_mm"], may: ["hole_diameter_mm"] },
  rod: { needs: ["diameter_mm", "length_mm", "exposed_ends"], may: [] },
  "flush-disc": { needs: ["diameter_mm"], may: [] },
};
export const shapeFields = (shape: CouponShape): CouponColumn[] => [
  ...SHAPE_FIELDS[shape].needs,
  ...SHAPE_FIELDS[shape].may,
];

const DIMENSION_WORDS: Record<string, string> = {
  length_mm: "length",
  width_mm: "width",
  thickness_mm: "thickness",
  diameter_mm: "diameter",
  hole_diameter_mm: "hole diameter",
  exposed_ends: "number of exposed ends",
};
const SHAPE_WORDS: Record<CouponShape, string> = {
  strip: "A strip",
  disc: "A disc",
  rod: "A rod",
  "flush-disc": "A flush disc",
};

/** The calculation library's names for the geometry, mapped back to our columns. */
const GEOMETRY_FIELDS: Record<string, CouponColumn> = {
  lengthMm: "length_mm",
  widthMm: "width_mm",
  thicknessMm: "thickness_mm",
  diameterMm: "diameter_mm",
  holeDiameterMm: "hole_diameter_mm",
  exposedEnds: "exposed_ends",
};

/**
 * Turns a RangeError of couponArea ("holeDiameterMm must be < widthMm 10 (got 12): the
 * hole would be wider than the strip") into the field it concerns and a sentence.
 */
export function geometryFieldError(error: RangeError): { field: CouponColumn | "shape"; message: string } {
  const name = error.message.split(" ")[0];
  const field = GEOMETRY_FIELDS[name] ?? "shape";
  let message = error.message;
  for (const [lib, column] of Object.entries(GEOMETRY_FIELDS)) {
    const unit = column.endsWith("_mm") ? " mm" : "";
    message = message
      .replace(new RegExp(`< ${lib} ([0-9.]+)`), `less than the ${DIMENSION_WORDS[column]} of $1${unit}`)
      .replace(new RegExp(`\\b${lib}\\b`), `the ${DIMENSION_WORDS[column]}`);
  }
  message = message.replace(/\(got ([^)]+)\)/, (_, got) => `(you gave ${got}${field.endsWith("_mm") ? " mm" : ""})`);
  return { field, message: `${cap(message)}.` };
}

const dimension = (what: string) => optionalDecimal({ what, unit: "mm", gt: 0, max: 99_999, decimals: 3 });

/**
 * The coupon form's fields (the CSV columns). Each field is checked on its own, so one
 * mistake does not hide another; parseCoupon then checks the fields against each
 * other: the dimensions the shape needs, the geometry (through couponArea) and the
 * source of an overriding density.
 */
export const couponSchema = z.object({
  serial: requiredText("the coupon serial", 40).regex(
    /^[A-Za-z0-9][A-Za-z0-9._/-]*$/,
    "Use letters, digits and . _ / - only in the serial, starting with a letter or digit (no spaces).",
  ),
  material: z
    .string({ error: "Choose the coupon material." })
    .trim()
    .min(1, "Choose the coupon material.")
    .transform((v, ctx) => {
      try {
        return findMaterial(v).key;
      } catch {
        ctx.addIssue({
          code: "custom",
          message: `'${v}' is not a material Wallcast knows; use one of ${MATERIALS.map((m) => m.key).join(", ")} or its UNS number.`,
        });
        return z.NEVER;
      }
    }),
  shape: z
    .string({ error: "Choose the coupon shape: strip, disc, rod or flush-disc." })
    .trim()
    .toLowerCase()
    .pipe(z.enum(COUPON_SHAPES, { error: "Choose the coupon shape: strip, disc, rod or flush-disc." })),
  length_mm: dimension("the length"),
  width_mm: dimension("the width"),
  thickness_mm: dimension("the thickness"),
  diameter_mm: dimension("the diameter"),
  hole_diameter_mm: optionalDecimal({ what: "the hole diameter", unit: "mm", min: 0, max: 99_999, decimals: 3 }),
  exposed_ends: z
    .unknown()
    .optional()
    .transform((raw, ctx) => {
      if (blank(raw)) return undefined;
      const read = readDecimal(raw);
      if (!("value" in read) || ![0, 1, 2].includes(read.value)) {
        ctx.addIssue({ code: "custom", message: "The number of exposed ends must be 0, 1 or 2." });
        return z.NEVER;
      }
      return read.value as 0 | 1 | 2;
    }),
  initial_mass_g: requiredDecimal({
    what: "the initial mass",
    unit: "g",
    min: 0.0001,
    max: 99_999_999,
    decimals: 4,
    decimalsWhy: "it is recorded to 0.1 mg",
  }),
  balance_resolution_g: optionalDecimal({ what: "the balance resolution", unit: "g", gt: 0, max: 1, decimals: 5 }),
  density_g_cm3: optionalDecimal({ what: "the density", unit: "g/cm³", gt: 0.5, max: 25, decimals: 3 }),
  density_source: optionalText("the density source", 200),
  lot: optionalText("the lot", 80),
  certificate: optionalText("the certificate", 120),
});

export type CouponRecord = {
  serial: string;
  materialCode: string;
  densityGcm3: number;
  densitySource: string;
  geometry: CouponGeometry;
  /** Exposed area from the geometry, cm². */
  areaCm2: number;
  initialMassG: number;
  balanceResolutionG: number;
  lot: string;
  certificate: string;
};
export type CouponIssue = { field: CouponColumn | "form"; message: string };

export function parseCoupon(
  input: FormInput,
): { ok: true; value: CouponRecord } | { ok: false; issues: CouponIssue[] } {
  const issues: CouponIssue[] = [];
  const v: Record<string, unknown> = {};
  for (const [field, schema] of Object.entries(couponSchema.shape)) {
    const r = (schema as z.ZodType).safeParse(input[field]);
    if (r.success) v[field] = r.data;
    else
      issues.push({ field: field as CouponColumn, message: r.error.issues[0]?.message ?? "This value is not valid." });
  }
  const failed = new Set(issues.map((i) => i.field));
  const ok = (...fields: CouponColumn[]) => fields.every((f) => !failed.has(f));
  const f = v as Partial<z.output<typeof couponSchema>>;

  if (ok("shape") && f.shape) {
    const shape = f.shape;
    const rule = SHAPE_FIELDS[shape];
    for (const d of rule.needs)
      if (ok(d) && f[d] === undefined)
        issues.push({ field: d, message: `${SHAPE_WORDS[shape]} coupon needs its ${DIMENSION_WORDS[d]}.` });
    for (const d of Object.keys(DIMENSION_WORDS) as CouponColumn[]) {
      if (rule.needs.includes(d) || rule.may.includes(d) || !ok(d)) continue;
      const value = f[d as keyof typeof f];
      if (value === undefined || (d === "hole_diameter_mm" && value === 0)) continue;
      issues.push({
        field: d,
        message: `${SHAPE_WORDS[shape]} coupon has no ${DIMENSION_WORDS[d]}; leave it empty (or check the shape).`,
      });
    }
  }
  let areaCm2: number | undefined;
  let geometry: CouponGeometry | undefined;
  const geometryFields = ["shape", ...Object.keys(DIMENSION_WORDS)] as CouponColumn[];
  if (geometryFields.every((g) => !issues.some((i) => i.field === g)) && f.shape) {
    geometry = geometryOf({ ...(f as GeometryColumns), hole_diameter_mm: f.hole_diameter_mm ?? 0 });
    try {
      areaCm2 = couponArea(geometry);
    } catch (error) {
      if (!(error instanceof RangeError)) throw error;
      const { field, message } = geometryFieldError(error);
      issues.push({ field, message });
    }
  }
  const material = ok("material") && f.material ? findMaterial(f.material) : undefined;
  const overridden =
    material !== undefined && f.density_g_cm3 !== undefined && f.density_g_cm3 !== material.densityGcm3;
  if (overridden && ok("density_g_cm3", "density_source") && f.density_source === "")
    issues.push({
      field: "density_source",
      message: `Say where the density ${f.density_g_cm3} g/cm³ comes from (e.g. the supplier’s certificate); the material’s own is ${material.densityGcm3} g/cm³.`,
    });

  if (issues.length > 0 || !material || !geometry || areaCm2 === undefined) {
    const order = COUPON_COLUMNS.map((c) => c.name as string);
    return { ok: false, issues: issues.sort((a, b) => order.indexOf(a.field) - order.indexOf(b.field)) };
  }
  return {
    ok: true,
    value: {
      serial: f.serial as string,
      materialCode: material.key,
      densityGcm3: overridden ? (f.density_g_cm3 as number) : material.densityGcm3,
      densitySource: overridden ? (f.density_source as string) : f.density_source || material.densitySource,
      geometry,
      areaCm2,
      initialMassG: f.initial_mass_g as number,
      balanceResolutionG: f.balance_resolution_g ?? 0.0001,
      lot: f.lot ?? "",
      certificate: f.certificate ?? "",
    },
  };
}

export type GeometryColumns = {
  shape: CouponShape;
  length_mm?: number | string | null;
  width_mm?: number | string | null;
  thickness_mm?: number | string | null;
  diameter_mm?: number | string | null;
  hole_diameter_mm?: number | string | null;
  exposed_ends?: number | null;
};

/** The calculation library's geometry from coupon columns (stored rows or parsed input). */
export function geometryOf(c: GeometryColumns): CouponGeometry {
  const n = (v: number | string | null | undefined) => (v === null || v === undefined ? NaN : Number(v));
  switch (c.shape) {
    case "strip":
      return {
        shape: "strip",
        lengthMm: n(c.length_mm),
        widthMm: n(c.width_mm),
        thicknessMm: n(c.thickness_mm),
        holeDiameterMm: n(c.hole_diameter_mm ?? 0),
      };
    case "disc":
      return {
        shape: "disc",
        diameterMm: n(c.diameter_mm),
        thicknessMm: n(c.thickness_mm),
        holeDiameterMm: n(c.hole_diameter_mm ?? 0),
      };
    case "rod":
      return {
        shape: "rod",
        diameterMm: n(c.diameter_mm),
        lengthMm: n(c.length_mm),
        exposedEnds: n(c.exposed_ends) as 0 | 1 | 2,
      };
    case "flush-disc":
      return { shape: "flush-disc", diameterMm: n(c.diameter_mm) };
  }
}

/** A material as people read it ("Carbon steel"), never the internal key; an unknown key as stored. */
export const materialName = (key: string): string =>
  MATERIALS.find((m) => m.key === key)?.name.replace(/\s*\(.*\)$/, "") ?? key;

/**
 * The source of a density as the screens show it: the table's recalled values read
 * "ASTM G1, App. X1 (unverified)" (the full caveat stays in the stored basis); a density
 * stated with its own source shows that source.
 */
export const densitySourceLabel = (source: string): string =>
  MATERIALS.some((m) => m.densitySource === source) ? DENSITY_SOURCE_LABEL : source;
