import type { Units } from "../context";
import { findMaterial, mmPerYearToMpy, mmToInch } from "../domain/index.ts";
import { roleLabels } from "./permissions";
import { formatLocal } from "./time";

/**
 * What each audit event means, in the words people read (the stored code stays for
 * machines and the CSV). Pure: every screen that lists audit events uses this one table.
 */
const words: Record<string, string> = {
  "api_client.created": "API client created",
  "api_client.revoked": "API client revoked",
  "attachment.uploaded": "file attached (photo, sheet or instrument export)",
  "attachment.removed": "file removed (photo, sheet or instrument export)",
  "circuit.created": "circuit added",
  "circuit.updated": "circuit edited",
  "circuit.design_imported": "circuit design data imported from CSV",
  "cml.created": "CML added",
  "cml.updated": "CML edited",
  "cml.retired": "CML retired",
  "cml.returned_to_use": "CML returned to use",
  "cml.component_replaced": "component replaced at a CML",
  "cml.imported": "CMLs imported from CSV",
  "contract.created": "contract added",
  "contract.updated": "contract edited",
  "contract.ended": "contract ended",
  "contractor.added": "contractor company added",
  "coupon.created": "coupon added to stock",
  "email.released": "undelivered e-mail sent again",
  "coupon.installed": "coupon installed",
  "coupon.removed": "coupon removed",
  "lab_result.entered": "lab results entered",
  "life.recomputed": "remaining life recomputed",
  "life.recompute_failed": "remaining-life recompute failed",
  "life_policy.updated": "remaining-life rate policy changed",
  "lab_result.edited": "lab results edited",
  "member.invited": "person invited",
  "member.activated": "first sign-in",
  "member.role_changed": "role changed",
  "member.disabled": "person disabled",
  "member.enabled": "person enabled again",
  "member.identity_bound": "sign-in identity bound",
  "member.identity_reset": "sign-in identity reset",
  "monitoring_point.created": "monitoring point added",
  "monitoring_point.updated": "monitoring point edited",
  "owner_settings.updated": "severity thresholds or minimum exposure changed",
  "process_unit.created": "process unit added",
  "process_unit.updated": "process unit edited",
  "scenario.loaded": "demo scenario loaded",
  "scenario.coupon_history_loaded": "demo coupon history loaded",
  "scenario.thickness_history_loaded": "demo thickness surveys loaded",
  "sign_in.admitted": "signed in",
  "sign_in.refused": "sign-in refused",
  "site.created": "site added",
  "site.updated": "site edited",
  "submission.created": "draft started",
  "submission.submitted": "submitted for review",
  "submission.approved": "approved",
  "submission.returned": "returned to the contractor",
  "submission.correction_opened": "correction opened",
  "submission.superseded": "superseded by its approved correction",
  "survey.circuits_added": "circuits added to the survey",
  "thickness_reading.entered": "thickness reading entered",
  "thickness_reading.edited": "thickness reading edited",
  "thickness_reading.cleared": "thickness reading cleared",
};

/** The event in words; an unknown code is shown as it is stored. */
export const auditActionWords = (action: string): string => words[action] ?? action;

// ── Before → after, in words ─────────────────────────────────────────────────────────

/** Who reads the trail: values are shown in their units, times in their zone. */
export type AuditReader = { units: Units; timeZone: string };

/** One changed field: its name in words and each side as text (null: not set). */
export type AuditChange = { field: string; before: string | null; after: string | null };

const fieldWords: Record<string, string> = {
  belowRequired: "circuits below required thickness",
  couponRateBasis: "coupon rate for estimates",
  couponWindowYears: "coupon window (years)",
  maxIntervalYears: "owner's maximum interval (years)",
  minimumRateMmPerYear: "stated minimum rate",
  ratePolicy: "rate policy",
  rateDisagreementFactor: "coupon/thickness disagreement factor",
  seconds: "time taken (s)",
  trigger: "started by",
  access_fitting: "access fitting",
  acknowledged: "warnings acknowledged",
  active: "in use",
  attachment: "attachment",
  balance_resolution_g: "balance resolution",
  baseMetalFromCycle: "cleaning-curve base-metal cycle",
  blankInitialMassG: "blank mass before cleaning",
  blankMassesG: "blank masses after cleaning",
  by: "superseded by",
  byte_size: "file size",
  certificate: "certificate",
  baseline_on: "base-line date",
  baseline_thickness_mm: "base-line thickness",
  circuit_id: "circuit",
  component: "component",
  injection_point: "injection point",
  location: "location",
  replaced_on: "replaced on",
  retired: "retired",
  cleaningMethod: "cleaning method",
  comment: "comment",
  content_type: "file type",
  contractor: "contractor",
  corrects: "corrects",
  coupon: "coupon",
  couponMassesG: "coupon masses after cleaning",
  damage: "damage seen at removal",
  density_g_cm3: "density",
  density_source: "density source",
  deposits: "deposits seen at removal",
  description: "description",
  diameter_mm: "diameter",
  email: "e-mail",
  issuer: "identity provider",
  refusal: "why refused",
  sessions_ended: "sessions ended",
  subject: "identity-provider account",
  ends_on: "ends on",
  exposed_ends: "ends exposed",
  family: "material family",
  finalMassG: "final mass",
  generalThresholds: "general-rate thresholds",
  high: "high from",
  hole_diameter_mm: "hole diameter",
  initial_mass_g: "initial mass",
  installed_at: "installed",
  kind: "kind",
  lab: "lab results",
  labNotes: "lab notes",
  length_mm: "length",
  lot: "lot",
  material_code: "material",
  minimumExposureDays: "minimum exposure",
  mmPerYear: "general rate",
  moderate: "moderate from",
  mounting: "mounting",
  name: "name",
  notes: "notes",
  orientation: "orientation",
  pitDepthsMm: "pit depths",
  pittingThresholds: "pitting-rate thresholds",
  pitting_visible: "pitting visible",
  planned_exposure_days: "planned exposure",
  point: "monitoring point",
  reference: "reference",
  removed_at: "removed",
  removed_by: "removed by",
  removed_by_organisation_id: "removed by organisation",
  reply: "contractor's reply",
  photosRequired: "photo of every coupon asked for",
  revision: "revision",
  revoked_at: "revoked",
  role: "role",
  scope: "scope",
  scopes: "scopes",
  serial: "serial",
  service: "service",
  severe: "severe above",
  sha256: "SHA-256",
  shape: "shape",
  site_id: "site",
  sites: "sites",
  starts_on: "starts on",
  status: "status",
  tag: "tag",
  thickness_mm: "thickness",
  token_hint: "token starts",
  unit_id: "process unit",
  version: "version",
  width_mm: "width",
  worst: "worst severity",
};

/** A stored key in words: a known name, else the key with its underscores and capitals spelled out. */
export function auditFieldWords(key: string): string {
  return (
    fieldWords[key] ??
    key
      .replace(/_/g, " ")
      .replace(/([a-z])([A-Z])/g, "$1 $2")
      .toLowerCase()
  );
}

const uuidPattern = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i;
const instantPattern = /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}/;

/** Six significant figures, trailing zeros dropped: enough for any stored quantity, never a float's noise. */
const plain = (v: number) => String(Number(v.toPrecision(6)));

type Quantity = "rate" | "length" | "mass" | "days" | "density" | "bytes" | null;

/** What a stored number measures, from its key and the keys above it (values are stored in SI). */
function quantityOf(path: string[]): Quantity {
  const key = path[path.length - 1] ?? "";
  const parent = path[path.length - 2] ?? "";
  if (/mm_y$|MmPerYear$|^mmPerYear$/.test(key) || /Thresholds$/.test(parent)) return "rate";
  if (/_mm$|Mm$/.test(key)) return "length";
  if (/_g$|G$/.test(key)) return "mass";
  if (/_days$|Days$/.test(key)) return "days";
  if (key === "density_g_cm3") return "density";
  if (key === "byte_size") return "bytes";
  return null;
}

function numberText(v: number, quantity: Quantity, reader: AuditReader): string {
  if (!Number.isFinite(v)) return String(v);
  switch (quantity) {
    case "rate":
      return reader.units === "us" ? `${mmPerYearToMpy(v).toFixed(2)} mpy` : `${v.toFixed(3)} mm/y`;
    case "length":
      return reader.units === "us" ? `${mmToInch(v).toFixed(4)} in` : `${plain(v)} mm`;
    case "mass":
      return `${v.toFixed(4)} g`;
    case "days":
      return `${plain(v)} d`;
    case "density":
      return `${v.toFixed(2)} g/cm³`;
    case "bytes":
      return v >= 1024 * 1024 ? `${(v / 1024 / 1024).toFixed(1)} MB` : `${Math.max(1, Math.round(v / 1024))} kB`;
    default:
      return plain(v);
  }
}

function valueText(v: unknown, path: string[], reader: AuditReader): string | null {
  if (v === null || v === undefined || v === "") return null;
  const key = path[path.length - 1] ?? "";
  if (typeof v === "number") return numberText(v, quantityOf(path), reader);
  if (typeof v === "boolean") return v ? "yes" : "no";
  if (Array.isArray(v)) {
    // A list of numbers shares one unit: "1.2, 0.8 mm" rather than a unit after each.
    if (v.length > 0 && v.every((x) => typeof x === "number")) {
      const texts = (v as number[]).map((x) => numberText(x, quantityOf(path), reader));
      const unit = texts[0].includes(" ") ? texts[0].slice(texts[0].indexOf(" ")) : "";
      return unit && texts.every((t) => t.endsWith(unit))
        ? `${texts.map((t) => t.slice(0, -unit.length)).join(", ")}${unit}`
        : texts.join(", ");
    }
    return v.map((x) => valueText(x, path, reader) ?? "—").join(", ");
  }
  if (typeof v === "string") {
    if (key === "role" && Object.hasOwn(roleLabels, v)) return roleLabels[v as keyof typeof roleLabels];
    if (key === "material_code") {
      try {
        return findMaterial(v).name;
      } catch {
        return v;
      }
    }
    if (uuidPattern.test(v)) return `${v.slice(0, 8)}…`;
    if (instantPattern.test(v)) return `${formatLocal(v, reader.timeZone)}`;
    return v.replace(/_/g, key === "status" || key === "scope" || key === "scopes" ? " " : "_");
  }
  return JSON.stringify(v);
}

const isRecord = (v: unknown): v is Record<string, unknown> => typeof v === "object" && v !== null && !Array.isArray(v);

/**
 * Before/after as the fields that differ, named in words, with values in the reader's
 * units and zone and sensible precision. Nested objects (lab results, thresholds) are
 * opened into one line per changed field ("lab results › final mass"). A creation
 * lists every field it set; a value that is not an object is shown as "value".
 */
export function auditChanges(before: unknown, after: unknown, reader: AuditReader): AuditChange[] {
  const asObject = (v: unknown): Record<string, unknown> =>
    isRecord(v) ? v : v === null || v === undefined ? {} : { value: v };
  const out: AuditChange[] = [];
  const walk = (b: Record<string, unknown>, a: Record<string, unknown>, path: string[]) => {
    for (const key of [...new Set([...Object.keys(b), ...Object.keys(a)])]) {
      const bv = b[key] ?? null;
      const av = a[key] ?? null;
      if (JSON.stringify(bv) === JSON.stringify(av)) continue;
      const here = [...path, key];
      if ((isRecord(bv) || bv === null) && (isRecord(av) || av === null) && (isRecord(bv) || isRecord(av))) {
        walk(asObject(bv), asObject(av), here);
        continue;
      }
      out.push({
        field: here.map(auditFieldWords).join(" › "),
        before: valueText(bv, here, reader),
        after: valueText(av, here, reader),
      });
    }
  };
  walk(asObject(before), asObject(after), []);
  return out;
}
