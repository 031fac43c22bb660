/**
 * Bad input never gives a 5xx. Every action of the production build (and every /api/v1
 * endpoint) has rows here: its forms, each form's fields with their kind, and a valid
 * body to start from. Each field is then sent with every bad value of its kind, as each
 * role that may use the form; the answer must be below 500 (400 with a message for bad
 * values), and nothing may be written. Whole bodies of the wrong kind (JSON, malformed
 * multipart, plain text) are sent to every action as well.
 *
 * A route of the build that has an action but no rows here fails the first test.
 */
import type { Express } from "express";
import request from "supertest";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { recordExchange } from "../../app/models/exposures.server";
import { saveLabResult } from "../../app/models/lab-results.server";
import { submitForReview } from "../../app/models/submissions.server";
import { startSurvey } from "../../app/models/thickness-surveys.server";
import { isUuid } from "../../app/services/ids";
import { loadBuild } from "../../server";
import { productionApp, shutdownApp } from "../helpers/app";
import { createTestDatabase, type TestDatabase } from "../helpers/db";
import { buildWorld, createCouponPoint, dateFromToday, daysAgoAt, type World } from "../helpers/fixtures";
import { outcomeOf } from "../helpers/outcome";
import { buildSurveyWorld, flag } from "../helpers/review-world";
import { sessionCookieFor } from "../helpers/session";

// ------------------------------------------------------------------ field kinds and their bad values

type Field =
  | { kind: "text" }
  | { kind: "multiline" }
  /** `extra`: bad values this select's own options invite (a prefix with a bad id). */
  | { kind: "select"; options: readonly string[]; extra?: readonly string[] }
  /** Tick boxes `name.<value>` = on. */
  | { kind: "ticks"; options: readonly string[] }
  | { kind: "number"; required?: boolean }
  | { kind: "number-list" }
  /** A repeated field: one value per cleaning cycle. */
  | { kind: "series" }
  | { kind: "uuid" }
  | { kind: "date" }
  | { kind: "datetime" }
  | { kind: "file" };

/** A value as typed, or bytes already percent-encoded (what no browser's encoder would make). */
type Bad = string | { raw: string; label: string } | { list: string[]; label: string };

const controls: Bad[] = [
  "a\u0000b",
  "a\u001bb",
  "a\u001fb",
  "a\u007fb",
  // a lone surrogate as a browser's encoder cannot send it: WTF-8 bytes, and the escape
  { raw: "%ED%A0%80", label: "lone surrogate (WTF-8 bytes)" },
  "a\uFFFDb",
  "x".repeat(100_000),
];
const lineBreaks: Bad[] = ["a\nb", "a\rb", "a\tb"];
const selectBad = ["no-such-option", "__proto__", "toString", "constructor", "on\u0000", "x".repeat(10_000)];
const numberBad = ["NaN", "Infinity", "-Infinity", "1e309", "-1e309", "0x10", "1_000", "1e5e5", "١٢", "--1"];
const hugeList = (n: number) => Array.from({ length: n }, () => "0.1").join(",");
const uuidBad = [
  "not-a-uuid",
  "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d1g",
  "' or 1=1 --",
  "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10",
];
const dateBad = ["2026-13-45", "275760-09-13", "+275760-09-13", "0000-00-00", "2026-02-30", "d".repeat(10_000)];
const datetimeBad = [
  "2026-13-45T10:00",
  "275760-09-13T00:00",
  "+275760-09-13T00:00",
  "2026-02-30T10:00",
  "2026-01-01T25:00",
  "T",
  "d".repeat(10_000),
];

function badValues(field: Field): Bad[] {
  switch (field.kind) {
    case "text":
      return [...controls, ...lineBreaks];
    case "multiline":
      return controls;
    case "select":
      return [...selectBad, ...(field.extra ?? [])];
    case "ticks":
      return selectBad;
    case "number":
      return field.required ? [...numberBad, "", "  "] : numberBad;
    case "number-list":
      return [...numberBad, { raw: encodeURIComponent(hugeList(200_000)), label: "200,000 values" }];
    case "series":
      return [...numberBad, { list: Array.from({ length: 5_000 }, () => "1"), label: "5,000 cycles" }];
    case "uuid":
      return uuidBad;
    case "date":
      return dateBad;
    case "datetime":
      return datetimeBad;
    case "file":
      return [];
  }
}

const label = (b: Bad) =>
  typeof b === "string" ? JSON.stringify(b.length > 40 ? `${b.slice(0, 20)}… (${b.length})` : b) : b.label;

// ------------------------------------------------------------------ the table

type Caller = "admin" | "engineer" | "manager" | "tech" | "inspector";
type Ids = {
  site: string;
  point: string;
  labExposure: string;
  draft: string;
  submitted: string;
  contract: string;
  unit: string;
  circuit: string;
  cml: string;
  apiClient: string;
  member: string;
  version: string;
  survey: string;
  reviewSurvey: string;
  surveyVersion: string;
  surveyReading: string;
};
type Body = Array<[string, string]>;
type Form = {
  /** Name of the form in test titles (its intent, or the form's purpose). */
  name: string;
  /** Where the page with this form is (an edit form opened by a search parameter); else the route's path. */
  path?: (ids: Ids) => string;
  /** A body the action accepts: every row changes one field of it. */
  base: (ids: Ids) => Body;
  fields: Record<string, Field>;
};
type ActionRows = {
  path: (ids: Ids) => string;
  /** Roles that may use the form (the isolation matrix checks those that may not). */
  callers: Caller[];
  /** Multipart bodies only (an upload endpoint). */
  multipart?: true;
  /** The intents of the route; nonsense intents are sent to each route that has them. */
  intents?: readonly string[];
  forms: Form[];
};

/** The survey's one reading, named before the table is read (its acknowledgement field carries the id). */
const surveyReadingId = "3f6b0a52-8c1d-4e7a-9b2f-5d4c3a2b1e0f";

const zones = ["UTC", "Europe/London", "America/Chicago"];
const materials = ["carbon-steel", "ss-304", "ss-304l"];
const families = ["stainless-steel", "copper-alloy"];
const onOff = ["on", "off"];
const siteFields: Record<string, Field> = {
  name: { kind: "text" },
  code: { kind: "text" },
  time_zone: { kind: "select", options: zones },
};
const pointFields: Record<string, Field> = {
  circuit_id: { kind: "uuid" },
  tag: { kind: "text" },
  access_fitting: { kind: "text" },
  orientation: { kind: "text" },
  mounting: { kind: "select", options: ["flush", "intrusive"] },
  planned_exposure_days: { kind: "number" },
  active: { kind: "select", options: onOff },
};
const pointBase = (ids: Ids, intent: string, tag: string): Body => [
  ["intent", intent],
  ["circuit_id", ids.circuit],
  ["tag", tag],
  ["access_fitting", "2 in. flareweld"],
  ["orientation", "top"],
  ["mounting", "intrusive"],
  ["planned_exposure_days", "90"],
  ["active", "off"],
  ["active", "on"],
];
const cmlFields: Record<string, Field> = {
  tag: { kind: "text" },
  location: { kind: "text" },
  component: { kind: "select", options: ["pipe", "elbow", "tee"] },
  injection_point: { kind: "select", options: onOff },
  baseline_thickness_mm: { kind: "number" },
  baseline_on: { kind: "date" },
};
const cmlBase = (intent: string, tag: string): Body => [
  ["intent", intent],
  ["tag", tag],
  ["location", "first elbow"],
  ["component", "elbow"],
  ["injection_point", "off"],
  ["injection_point", "on"],
  ["baseline_thickness_mm", "7.6"],
  ["baseline_on", "2024-03-01"],
];
const circuitDesignFields: Record<string, Field> = {
  nps: { kind: "text" },
  schedule: { kind: "text" },
  outside_diameter_mm: { kind: "number" },
  nominal_wall_mm: { kind: "number" },
  mill_tolerance_pct: { kind: "number" },
  design_pressure_mpa: { kind: "number" },
  design_temperature_c: { kind: "number" },
  allowable_stress_mpa: { kind: "number" },
  joint_factor_e: { kind: "number" },
  weld_factor_w: { kind: "number" },
  y_coefficient: { kind: "number" },
  corrosion_allowance_mm: { kind: "number" },
  structural_minimum_mm: { kind: "number" },
  structural_minimum_reason: { kind: "text" },
  piping_class: { kind: "select", options: ["1", "2", "3", "4"] },
};
/** Invented design data of an NPS 6 line. */
const circuitDesignBase: Body = [
  ["nps", "6"],
  ["schedule", "40"],
  ["outside_diameter_mm", "168.3"],
  ["nominal_wall_mm", "7.11"],
  ["mill_tolerance_pct", "12.5"],
  ["design_pressure_mpa", "1.2"],
  ["design_temperature_c", "150"],
  ["allowable_stress_mpa", "138"],
  ["joint_factor_e", "1"],
  ["weld_factor_w", "1"],
  ["y_coefficient", ""],
  ["corrosion_allowance_mm", "3"],
  ["structural_minimum_mm", "3.2"],
  ["structural_minimum_reason", "Site rule for lines near pumps"],
  ["piping_class", "2"],
];
/** The CML of the survey's circuit, with a fixed id so the grid's field names are known here. */
const SURVEY_CML = "5b0e0c0a-1111-4a2b-8c3d-000000000001";
const cmlField = (field: string) => `cml.${SURVEY_CML}.${field}`;
const thresholds = ["general", "pitting"].flatMap((k) => ["moderate", "high", "severe"].map((l) => `${k}_${l}`));

export const table: Record<string, ActionRows> = {
  "routes/auth.logout": {
    path: () => "/auth/logout",
    callers: ["admin", "tech"],
    forms: [{ name: "sign out", base: () => [], fields: {} }],
  },
  "routes/profile": {
    path: () => "/profile",
    callers: ["admin", "engineer", "manager", "tech"],
    intents: ["units", "timeZone"],
    forms: [
      {
        name: "units",
        base: () => [
          ["intent", "units"],
          ["units", "us"],
        ],
        fields: { units: { kind: "select", options: ["si", "us"] } },
      },
      {
        name: "timeZone",
        base: () => [
          ["intent", "timeZone"],
          ["timeZone", "Europe/London"],
        ],
        fields: { timeZone: { kind: "select", options: zones } },
      },
    ],
  },
  "routes/admin.members": {
    path: () => "/admin/members",
    callers: ["admin"],
    intents: ["invite", "role", "disable", "enable", "resetIdentity", "resendEmail"],
    forms: [
      {
        name: "invite",
        base: () => [
          ["intent", "invite"],
          ["email", "new.person@one.test"],
          ["name", "New Person"],
          ["access", "plant_manager"],
        ],
        fields: {
          email: { kind: "text" },
          name: { kind: "text" },
          access: {
            kind: "select",
            options: ["administrator", "integrity_engineer", "plant_manager"],
            extra: ["technician:", "technician:not-a-uuid", "technician:7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10"],
          },
        },
      },
      {
        name: "role",
        base: (i) => [
          ["intent", "role"],
          ["userId", i.member],
          ["role", "integrity_engineer"],
        ],
        fields: {
          userId: { kind: "uuid" },
          role: { kind: "select", options: ["administrator", "integrity_engineer", "plant_manager"] },
        },
      },
      {
        name: "disable",
        base: (i) => [
          ["intent", "disable"],
          ["userId", i.member],
        ],
        fields: { userId: { kind: "uuid" } },
      },
      {
        name: "resetIdentity",
        base: (i) => [
          ["intent", "resetIdentity"],
          ["userId", i.member],
        ],
        fields: { userId: { kind: "uuid" } },
      },
      {
        name: "resendEmail",
        base: () => [
          ["intent", "resendEmail"],
          ["emailId", "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10"],
        ],
        fields: { emailId: { kind: "uuid" } },
      },
    ],
  },
  // The full re-verification of the audit chain: one intent, no fields.
  "routes/audit": {
    path: () => "/audit",
    callers: ["admin", "engineer"],
    intents: ["verifyAll"],
    forms: [{ name: "verifyAll", base: () => [["intent", "verifyAll"]], fields: {} }],
  },
  "routes/admin.api-clients": {
    path: () => "/admin/api-clients",
    callers: ["admin"],
    intents: ["create", "revoke"],
    forms: [
      {
        name: "create",
        base: () => [
          ["intent", "create"],
          ["name", "Plant LIMS"],
          ["expiresOn", ""],
          ["requestsPerMinute", ""],
          ["scopes.results:read", "off"],
          ["scopes.results:read", "on"],
        ],
        fields: {
          name: { kind: "text" },
          scopes: { kind: "ticks", options: ["lims:write", "results:read", "outlook:read"] },
          expiresOn: { kind: "date" },
          requestsPerMinute: { kind: "number" },
        },
      },
      {
        name: "revoke",
        base: (i) => [
          ["intent", "revoke"],
          ["clientId", i.apiClient],
        ],
        fields: { clientId: { kind: "uuid" } },
      },
    ],
  },
  "routes/contracts.new": {
    path: () => "/contracts/new",
    callers: ["admin"],
    forms: [
      {
        name: "new contract",
        base: (i) => [
          ["contractorId", "new"],
          ["newContractorName", "Fresh Co"],
          ["reference", "PO-2026-77"],
          [`siteIds.${i.site}`, "on"],
          ["scope.coupon_monitoring", "on"],
          ["startsOn", "2026-01-01"],
          ["endsOn", ""],
        ],
        fields: {
          contractorId: {
            kind: "select",
            options: ["new"],
            extra: ["not-a-uuid", "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10"],
          },
          newContractorName: { kind: "text" },
          reference: { kind: "text" },
          siteIds: { kind: "ticks", options: [] },
          scope: { kind: "ticks", options: ["coupon_monitoring", "thickness_inspection"] },
          startsOn: { kind: "date" },
          endsOn: { kind: "date" },
        },
      },
    ],
  },
  "routes/contracts.$contractId": {
    path: (i) => `/contracts/${i.contract}`,
    callers: ["admin"],
    intents: ["update", "end"],
    forms: [
      {
        name: "update",
        base: (i) => [
          ["intent", "update"],
          [`siteIds.${i.site}`, "on"],
          ["scope.coupon_monitoring", "on"],
          ["startsOn", "2025-01-01"],
          ["endsOn", "2030-12-31"],
        ],
        fields: {
          siteIds: { kind: "ticks", options: [] },
          scope: { kind: "ticks", options: ["coupon_monitoring", "thickness_inspection"] },
          startsOn: { kind: "date" },
          endsOn: { kind: "date" },
        },
      },
      {
        name: "end",
        base: () => [
          ["intent", "end"],
          ["endsOn", "2030-06-30"],
          ["reason", "Scope moved in-house."],
        ],
        fields: { endsOn: { kind: "date" }, reason: { kind: "text" } },
      },
    ],
  },
  "routes/setup": {
    path: () => "/setup",
    callers: ["admin", "engineer"],
    intents: ["createSite"],
    forms: [
      {
        name: "createSite",
        base: () => [
          ["intent", "createSite"],
          ["name", "Plant N"],
          ["code", "PN"],
          ["time_zone", "UTC"],
        ],
        fields: siteFields,
      },
    ],
  },
  "routes/setup.sites.$siteId": {
    path: (i) => `/setup/sites/${i.site}`,
    callers: ["admin", "engineer"],
    intents: ["updateSite", "createUnit", "updateUnit", "createCircuit", "updateCircuit", "createPoint"],
    forms: [
      {
        name: "updateSite",
        base: () => [
          ["intent", "updateSite"],
          ["name", "Plant A renamed"],
          ["code", "PA"],
          ["time_zone", "America/Chicago"],
        ],
        fields: siteFields,
      },
      {
        name: "createUnit",
        base: () => [
          ["intent", "createUnit"],
          ["tag", "U-9"],
          ["description", "Crude unit"],
        ],
        fields: { tag: { kind: "text" }, description: { kind: "text" } },
      },
      {
        name: "updateUnit",
        path: (i) => `/setup/sites/${i.site}?unit=${i.unit}`,
        base: (i) => [
          ["intent", "updateUnit"],
          ["id", i.unit],
          ["tag", "U-1"],
          ["description", "Unit one, renamed"],
        ],
        fields: { id: { kind: "uuid" }, tag: { kind: "text" }, description: { kind: "text" } },
      },
      {
        name: "createCircuit",
        base: (i) => [
          ["intent", "createCircuit"],
          ["unit_id", i.unit],
          ["tag", "C-9"],
          ["material", "carbon-steel"],
          ["service", "overhead"],
          ["description", "Overhead line"],
          ...circuitDesignBase,
        ],
        fields: {
          unit_id: { kind: "uuid" },
          tag: { kind: "text" },
          material: { kind: "select", options: materials },
          service: { kind: "text" },
          description: { kind: "text" },
          ...circuitDesignFields,
        },
      },
      {
        name: "updateCircuit",
        path: (i) => `/setup/sites/${i.site}?circuit=${i.circuit}`,
        base: (i) => [
          ["intent", "updateCircuit"],
          ["id", i.circuit],
          ["unit_id", i.unit],
          ["tag", "C-1"],
          ["material", "carbon-steel"],
          ["service", "sour water, renamed"],
          ["description", ""],
          ...circuitDesignBase,
        ],
        fields: {
          id: { kind: "uuid" },
          unit_id: { kind: "uuid" },
          tag: { kind: "text" },
          material: { kind: "select", options: materials },
          service: { kind: "text" },
          description: { kind: "text" },
          ...circuitDesignFields,
        },
      },
      { name: "createPoint", base: (i) => pointBase(i, "createPoint", "CP-9"), fields: pointFields },
    ],
  },
  "routes/setup.circuits.$circuitId": {
    path: (i) => `/setup/circuits/${i.circuit}`,
    callers: ["admin", "engineer"],
    intents: ["createCml", "updateCml", "retireCml", "returnCml", "replaceComponent"],
    forms: [
      { name: "createCml", base: () => cmlBase("createCml", "CML-9"), fields: cmlFields },
      {
        name: "updateCml",
        path: (i) => `/setup/circuits/${i.circuit}?cml=${i.cml}`,
        base: (i) => [["id", i.cml], ...cmlBase("updateCml", "CML-1 new")],
        fields: { id: { kind: "uuid" }, ...cmlFields },
      },
      {
        name: "retireCml",
        path: (i) => `/setup/circuits/${i.circuit}?cml=${i.cml}`,
        base: (i) => [
          ["intent", "retireCml"],
          ["id", i.cml],
        ],
        fields: { id: { kind: "uuid" } },
      },
      {
        name: "returnCml",
        path: (i) => `/setup/circuits/${i.circuit}?cml=${i.cml}`,
        base: (i) => [
          ["intent", "returnCml"],
          ["id", i.cml],
        ],
        fields: { id: { kind: "uuid" } },
      },
      {
        name: "replaceComponent",
        path: (i) => `/setup/circuits/${i.circuit}?cml=${i.cml}`,
        base: (i) => [
          ["intent", "replaceComponent"],
          ["id", i.cml],
          ["replaced_on", new Date(Date.now() - 10 * 86_400_000).toISOString().slice(0, 10)],
          ["reason", "Elbow renewed after thinning"],
          ["baseline_thickness_mm", "7.4"],
        ],
        fields: {
          id: { kind: "uuid" },
          replaced_on: { kind: "date" },
          reason: { kind: "text" },
          baseline_thickness_mm: { kind: "number" },
        },
      },
    ],
  },
  "routes/setup.sites.$siteId.import": {
    path: (i) => `/setup/sites/${i.site}/import`,
    callers: ["admin", "engineer"],
    intents: ["importDesign", "importCmls"],
    forms: [
      {
        name: "importDesign",
        base: () => [
          ["intent", "importDesign"],
          ["csv", "circuit_tag,unit_tag,material\r\nC-1,U-1,carbon-steel\r\n"],
        ],
        fields: { csv: { kind: "multiline" } },
      },
      {
        name: "importCmls",
        base: () => [
          ["intent", "importCmls"],
          ["csv", "circuit_tag,cml_tag,component\r\nC-1,CML-1,pipe\r\n"],
        ],
        fields: { csv: { kind: "multiline" } },
      },
    ],
  },
  "routes/setup.points.$pointId": {
    path: (i) => `/setup/points/${i.point}`,
    callers: ["admin", "engineer"],
    intents: ["updatePoint"],
    forms: [{ name: "updatePoint", base: (i) => pointBase(i, "updatePoint", "CP-1 new"), fields: pointFields }],
  },
  "routes/setup.coupons": {
    path: () => "/setup/coupons",
    callers: ["admin", "engineer"],
    intents: ["createCoupon", "importCsv"],
    forms: [
      {
        name: "createCoupon",
        base: () => [
          ["intent", "createCoupon"],
          ["serial", "NEW-1"],
          ["material", "carbon-steel"],
          ["shape", "strip"],
          ["length_mm", "76.2"],
          ["width_mm", "19.05"],
          ["thickness_mm", "3.18"],
          ["hole_diameter_mm", "7.94"],
          ["exposed_ends", ""],
          ["initial_mass_g", "36.1234"],
          ["balance_resolution_g", "0.0001"],
          ["density_g_cm3", ""],
          ["density_source", ""],
          ["lot", "L-7"],
          ["certificate", "CERT-7"],
        ],
        fields: {
          serial: { kind: "text" },
          material: { kind: "select", options: materials },
          shape: { kind: "select", options: ["strip", "disc", "rod", "flush-disc"] },
          exposed_ends: { kind: "select", options: ["0", "1", "2"] },
          length_mm: { kind: "number" },
          width_mm: { kind: "number" },
          thickness_mm: { kind: "number" },
          hole_diameter_mm: { kind: "number" },
          initial_mass_g: { kind: "number", required: true },
          balance_resolution_g: { kind: "number" },
          density_g_cm3: { kind: "number" },
          density_source: { kind: "text" },
          lot: { kind: "text" },
          certificate: { kind: "text" },
        },
      },
      {
        name: "importCsv",
        base: () => [
          ["intent", "importCsv"],
          [
            "csv",
            "serial,material,shape,length_mm,width_mm,thickness_mm,hole_diameter_mm,initial_mass_g\r\nCSV-1,carbon-steel,strip,76.2,19.05,3.18,7.94,36.1234\r\n",
          ],
        ],
        fields: { csv: { kind: "multiline" } },
      },
    ],
  },
  "routes/setup.settings": {
    path: () => "/setup/settings",
    callers: ["admin", "engineer"],
    intents: [
      "useDefaults",
      "saveSettings",
      "saveFamilyThreshold",
      "removeFamilyThreshold",
      "saveLifePolicy",
      "recomputeLife",
    ],
    forms: [
      {
        name: "saveSettings",
        base: () => [
          ["intent", "saveSettings"],
          ["general_moderate", "0.03"],
          ["general_high", "0.13"],
          ["general_severe", "0.25"],
          ["pitting_moderate", ""],
          ["pitting_high", ""],
          ["pitting_severe", ""],
          ["minimum_exposure_days", "30"],
          ["photos_required", "off"],
        ],
        fields: {
          ...Object.fromEntries(thresholds.map((t) => [t, { kind: "number" } as Field])),
          minimum_exposure_days: { kind: "number" },
          photos_required: { kind: "select", options: onOff },
        },
      },
      {
        name: "saveFamilyThreshold",
        base: () => [
          ["intent", "saveFamilyThreshold"],
          ["family", "stainless-steel"],
          ["kind", "general"],
          ["moderate", "0.01"],
          ["high", "0.05"],
          ["severe", "0.1"],
        ],
        fields: {
          family: { kind: "select", options: families },
          kind: { kind: "select", options: ["general", "pitting"] },
          moderate: { kind: "number", required: true },
          high: { kind: "number", required: true },
          severe: { kind: "number", required: true },
        },
      },
      {
        name: "removeFamilyThreshold",
        base: () => [
          ["intent", "removeFamilyThreshold"],
          ["family", "stainless-steel"],
          ["kind", "general"],
        ],
        fields: {
          family: { kind: "select", options: families },
          kind: { kind: "select", options: ["general", "pitting"] },
        },
      },
      {
        name: "saveLifePolicy",
        base: () => [
          ["intent", "saveLifePolicy"],
          ["rate_policy", "regression_upper"],
          ["minimum_rate_mm_y", "0.02"],
          ["coupon_window_years", "3"],
          ["coupon_rate_basis", "pitting"],
          ["rate_disagreement_factor", "2.5"],
          ["max_interval_years", "8"],
        ],
        fields: {
          rate_policy: { kind: "select", options: ["greater_of_long_short", "regression_upper"] },
          minimum_rate_mm_y: { kind: "number" },
          coupon_window_years: { kind: "number" },
          coupon_rate_basis: { kind: "select", options: ["general", "pitting"] },
          rate_disagreement_factor: { kind: "number" },
          max_interval_years: { kind: "number" },
        },
      },
      {
        // engineers only: the administrator's requests are refused with 403
        name: "recomputeLife",
        base: () => [
          ["intent", "recomputeLife"],
          ["reason", "Quarterly integrity review"],
        ],
        fields: { reason: { kind: "text" } },
      },
    ],
  },
  "routes/pulls.$pointId.exchange": {
    path: (i) => `/pulls/${i.point}/exchange`,
    callers: ["tech"],
    forms: [
      {
        name: "exchange",
        base: () => {
          const yesterday = new Date(Date.now() - 86_400_000).toISOString().slice(0, 10);
          return [
            ["removedAt", `${yesterday}T10:00`],
            ["pittingVisible", "no"],
            ["deposits", "light scale"],
            ["damage", ""],
            ["notes", "Pulled on schedule."],
            ["installSerial", "STOCK-1"],
            ["installedAt", `${yesterday}T10:30`],
          ];
        },
        fields: {
          removedAt: { kind: "datetime" },
          pittingVisible: { kind: "select", options: ["", "yes", "no"] },
          deposits: { kind: "text" },
          damage: { kind: "text" },
          notes: { kind: "multiline" },
          installSerial: { kind: "select", options: ["STOCK-1"] },
          installedAt: { kind: "datetime" },
        },
      },
    ],
  },
  "routes/lab.$exposureId": {
    path: (i) => `/lab/${i.labExposure}`,
    callers: ["tech"],
    forms: [
      {
        name: "lab result",
        base: () => [
          ["cleaningMethod", "inhibited HCl"],
          ["massLossMethod", "final-mass"],
          ["finalMassG", "35.9"],
          ["blankInitialMassG", ""],
          ["baseMetalFromCycle", ""],
          ["pitDepthsMm", "0.05 0.08"],
          ["labNotes", "Light, even attack."],
        ],
        fields: {
          cleaningMethod: { kind: "text" },
          massLossMethod: { kind: "select", options: ["final-mass", "last-cycle", "cleaning-curve"] },
          couponMass: { kind: "series" },
          finalMassG: { kind: "number" },
          blankInitialMassG: { kind: "number" },
          blankMass: { kind: "series" },
          baseMetalFromCycle: { kind: "select", options: ["1", "2"] },
          pitDepthsMm: { kind: "number-list" },
          labNotes: { kind: "multiline" },
        },
      },
    ],
  },
  "routes/lab.$exposureId.attachments": {
    path: (i) => `/lab/${i.labExposure}/attachments`,
    callers: ["tech"],
    multipart: true,
    forms: [
      {
        name: "upload",
        base: () => [["kind", "as_removed"]],
        fields: {
          kind: { kind: "select", options: ["as_removed", "after_cleaning", "pit_close_up", "lab_sheet"] },
          file: { kind: "file" },
        },
      },
    ],
  },
  "routes/lab-import": {
    path: () => "/lab-import",
    callers: ["tech"],
    multipart: true,
    forms: [{ name: "import", base: () => [], fields: { file: { kind: "file" } } }],
  },
  "routes/submissions.$submissionId": {
    path: (i) => `/submissions/${i.draft}`,
    callers: ["tech"],
    intents: ["submit"],
    forms: [
      {
        name: "submit",
        base: () => [
          ["intent", "submit"],
          ["reply", ""],
        ],
        fields: { reply: { kind: "multiline" } },
      },
    ],
  },
  "routes/review.$submissionId": {
    path: (i) => `/review/${i.submitted}`,
    callers: ["engineer"],
    intents: ["approve", "return", "correct"],
    forms: [
      {
        name: "return",
        base: (i) => [
          ["intent", "return"],
          ["version", i.version],
          ["comment", "Please re-weigh the coupon."],
          ["reason", ""],
          ["confirm", "off"],
        ],
        fields: {
          version: { kind: "number", required: true },
          comment: { kind: "multiline" },
          confirm: { kind: "select", options: onOff },
        },
      },
      {
        name: "correct",
        base: () => [
          ["intent", "correct"],
          ["reason", "The final mass was mistyped."],
        ],
        fields: { reason: { kind: "multiline" } },
      },
      {
        // A thickness survey with a reading at required thickness: its warning needs a reason.
        name: "approve a thickness survey",
        path: (i) => `/review/${i.reviewSurvey}`,
        base: (i) => [
          ["intent", "approve"],
          ["version", i.surveyVersion],
          ["comment", ""],
          [`ack.${i.surveyReading}.below-required`, "Sleeve fitted under a work order"],
          ["confirm", "on"],
        ],
        fields: {
          version: { kind: "number", required: true },
          comment: { kind: "multiline" },
          [`ack.${surveyReadingId}.below-required`]: { kind: "text" },
          confirm: { kind: "select", options: ["on"] },
        },
      },
    ],
  },
  "routes/surveys": {
    path: () => "/surveys",
    callers: ["inspector"],
    intents: ["startSurvey"],
    forms: [
      {
        name: "startSurvey",
        base: (i) => [
          ["intent", "startSurvey"],
          ["siteId", i.site],
          [`circuit.${i.circuit}`, "on"],
        ],
        fields: { siteId: { kind: "uuid" }, circuit: { kind: "ticks", options: [] } },
      },
    ],
  },
  "routes/surveys.$submissionId": {
    path: (i) => `/surveys/${i.survey}`,
    callers: ["inspector"],
    intents: ["saveReadings", "submit"],
    forms: [
      {
        name: "saveReadings",
        base: () => [
          ["intent", "saveReadings"],
          [cmlField("measuredOn"), dateFromToday(-1)],
          [cmlField("reading1"), "6.85"],
          [cmlField("reading2"), "6.8"],
          [cmlField("method"), "UT"],
          [cmlField("instrument"), "UT gauge 7"],
          [cmlField("resolutionMm"), "0.01"],
          [cmlField("technician"), "R. Okafor"],
          [cmlField("notes"), "Near the weld."],
        ],
        fields: {
          [cmlField("measuredOn")]: { kind: "date" },
          [cmlField("reading1")]: { kind: "number" },
          [cmlField("reading2")]: { kind: "number" },
          [cmlField("method")]: { kind: "select", options: ["UT", "UT-scan", "RT", "EMAT", "other"] },
          [cmlField("instrument")]: { kind: "text" },
          [cmlField("resolutionMm")]: { kind: "number" },
          [cmlField("technician")]: { kind: "text" },
          [cmlField("notes")]: { kind: "multiline" },
        },
      },
      {
        name: "submit",
        base: () => [
          ["intent", "submit"],
          ["reply", ""],
        ],
        fields: { reply: { kind: "multiline" } },
      },
    ],
  },
  "routes/surveys.$submissionId.import": {
    path: (i) => `/surveys/${i.survey}/import`,
    callers: ["inspector"],
    multipart: true,
    forms: [{ name: "import", base: () => [], fields: { file: { kind: "file" } } }],
  },
  "routes/surveys.$submissionId.attachments": {
    path: (i) => `/surveys/${i.survey}/attachments`,
    callers: ["inspector"],
    multipart: true,
    forms: [
      {
        name: "upload",
        base: () => [["kind", "survey_photo"]],
        fields: {
          kind: { kind: "select", options: ["survey_sheet", "survey_photo", "instrument_export"] },
          file: { kind: "file" },
        },
      },
    ],
  },
  // Downloads and JSON endpoints: GET only; a body of any kind is a 405 (the API's splat a 404).
  "routes/attachments.$attachmentId": {
    path: () => "/attachments/7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10",
    callers: ["engineer", "tech"],
    forms: [],
  },
  "routes/attachments.$attachmentId.thumbnail": {
    path: () => "/attachments/7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d10/thumbnail",
    callers: ["engineer", "tech"],
    forms: [],
  },
  "routes/api.v1.me": { path: () => "/api/v1/me", callers: ["admin", "tech"], forms: [] },
  "routes/api.v1.submissions": { path: () => "/api/v1/submissions", callers: ["engineer", "tech"], forms: [] },
  "routes/api.v1.submissions.$submissionId": {
    path: (i) => `/api/v1/submissions/${i.submitted}`,
    callers: ["engineer", "tech"],
    forms: [],
  },
  "routes/api.v1.circuits": { path: () => "/api/v1/circuits", callers: ["engineer", "tech"], forms: [] },
  "routes/api.v1.circuits.$circuitId": {
    path: (i) => `/api/v1/circuits/${i.circuit}`,
    callers: ["engineer", "tech"],
    forms: [],
  },
  "routes/api.v1.sites": { path: () => "/api/v1/sites", callers: ["engineer", "tech"], forms: [] },
  "routes/api.v1.points": { path: () => "/api/v1/points", callers: ["engineer", "tech"], forms: [] },
  "routes/api.v1.results": { path: () => "/api/v1/results", callers: ["engineer", "tech"], forms: [] },
  "routes/api.v1.splat": { path: () => "/api/v1/no-such-endpoint", callers: ["admin"], forms: [] },
};

/** Query parameters of the JSON endpoints' GETs, each with its kind. */
// `callers`: who is asked (a contractor's session gets 404 from owner-only endpoints before any parameter is read).
const apiQueries: Array<{
  path: (i: Ids) => string;
  params: Record<string, Field | "cursor">;
  callers?: Array<"engineer" | "tech">;
}> = [
  {
    path: () => "/api/v1/submissions",
    params: {
      limit: { kind: "number", required: true },
      cursor: "cursor",
      site: { kind: "uuid" },
      contractor: { kind: "uuid" },
      status: { kind: "select", options: ["draft", "submitted", "returned", "approved", "superseded"] },
      kind: { kind: "select", options: ["coupon"] },
      worstSeverity: { kind: "select", options: ["low", "moderate", "high", "severe"] },
      flagged: { kind: "select", options: ["true", "false"] },
      order: { kind: "select", options: ["newest", "oldest"] },
    },
  },
  {
    path: () => "/api/v1/circuits",
    params: { limit: { kind: "number", required: true }, cursor: "cursor", siteId: { kind: "uuid" } },
    callers: ["engineer"],
  },
  {
    path: () => "/api/v1/results",
    params: { limit: { kind: "number", required: true }, kind: { kind: "select", options: ["coupon", "thickness"] } },
    callers: ["engineer"],
  },
  {
    path: () => "/api/v1/points",
    params: { limit: { kind: "number", required: true }, siteId: { kind: "uuid" } },
    callers: ["engineer"],
  },
];
const cursor = (text: string) => Buffer.from(text, "utf8").toString("base64url");
const cursorBad = (i: Ids): string[] => [
  cursor(`+275760-09-13T00:00:00.000Z|${i.submitted}`),
  cursor(`275760-09-13|${i.submitted}`),
  cursor(`2026-13-45|${i.submitted}`),
  cursor(`2026-02-30T10:00:00Z|${i.submitted}`),
  cursor(`1|${i.submitted}`),
  cursor(`2026-01-01T00:00:00Z\u0000|${i.submitted}`),
  cursor(`${"2026-01-01 ".repeat(300)}|${i.submitted}`),
  "c".repeat(4_000),
  "%ED%A0%80",
];

// ------------------------------------------------------------------ the world

let db: TestDatabase;
let app: Express;
let w: World;
let ids: Ids;
const cookies = new Map<Caller, string>();
const userIds = (): Record<Caller, string> => ({
  admin: w.users.admin.id,
  engineer: w.users.engineer.id,
  manager: w.users.manager.id,
  tech: w.users.tech.id,
  inspector: w.users.inspector.id,
});

/** The caller's session; a fresh one (not kept) for signing out. */
async function cookieOf(caller: Caller, fresh = false): Promise<string> {
  if (fresh) return sessionCookieFor(db.knex, userIds()[caller]);
  if (!cookies.has(caller)) cookies.set(caller, await sessionCookieFor(db.knex, userIds()[caller]));
  return cookies.get(caller)!;
}

/** Every table the app writes except the sessions: one md5 of all their rows. */
const written = [
  "organisations",
  "users",
  "sites",
  "process_units",
  "circuits",
  "monitoring_points",
  "coupons",
  "coupon_exposures",
  "coupon_results",
  "submissions",
  "submission_revisions",
  "cmls",
  "survey_circuits",
  "thickness_readings",
  "attachments",
  "contracts",
  "contract_sites",
  "owner_settings",
  "owner_family_thresholds",
  "api_clients",
  "email_outbox",
  "audit_events",
  "life_recompute_runs",
  "circuit_life",
  "cml_life",
];
async function fingerprint(): Promise<string> {
  const parts = written.map((t) => `(select md5(coalesce(string_agg(x::text, '|' order by x::text), '')) from ${t} x)`);
  const r = await db.knex.raw<{ rows: Array<{ f: string }> }>(`select concat_ws(',', ${parts.join(", ")}) as f`);
  return r.rows[0].f;
}

beforeAll(async () => {
  db = await createTestDatabase();
  process.env.DATABASE_URL = db.url;
  w = await buildWorld(db.knex);
  app = await productionApp();

  // CP-1: M-1 removed (lab result sent for review), M-2 in service, STOCK-1 ready to go in.
  await w.coupon("M-1");
  await w.coupon("M-2");
  await w.coupon("STOCK-1");
  await outcomeOf(
    recordExchange(db.knex, w.users.tech, w.point, { installSerial: "M-1", installedAt: daysAgoAt(100) }),
  );
  const first = await outcomeOf(
    recordExchange(db.knex, w.users.tech, w.point, {
      removedAt: daysAgoAt(5),
      installSerial: "M-2",
      installedAt: daysAgoAt(5, 10),
    }),
  );
  if (!first.ok || !first.removedExposureId) throw new Error("fixture exchange failed");
  const lab = {
    cleaningMethod: "",
    couponMassesG: [35.9],
    finalMassG: null,
    blankInitialMassG: null,
    blankMassesG: [],
    baseMetalFromCycle: null,
    pitDepthsMm: [],
    labNotes: "",
  };
  const sent = await outcomeOf(saveLabResult(db.knex, w.users.tech, first.removedExposureId, lab));
  if (!sent.ok) throw new Error("fixture lab result failed");
  const submitted = await outcomeOf(submitForReview(db.knex, w.users.tech, sent.submissionId));
  if (!submitted.ok) throw new Error("fixture submission failed");

  // CP-2: M-3 removed with its result in a draft; a third point's M-4 removed, waiting for the lab.
  await w.coupon("M-3");
  await w.coupon("M-4");
  await outcomeOf(
    recordExchange(db.knex, w.users.tech, w.point2, { installSerial: "M-3", installedAt: daysAgoAt(90) }),
  );
  const second = await outcomeOf(recordExchange(db.knex, w.users.tech, w.point2, { removedAt: daysAgoAt(2) }));
  if (!second.ok || !second.removedExposureId) throw new Error("fixture exchange failed");
  const draft = await outcomeOf(saveLabResult(db.knex, w.users.tech, second.removedExposureId, lab));
  if (!draft.ok) throw new Error("fixture draft failed");
  const circuit = await db.knex("circuits").where({ site_id: w.site.id }).first("id", "unit_id");
  const point3 = await createCouponPoint(
    db.knex,
    { id: w.owner.id, name: w.owner.name, kind: "owner" },
    { id: w.site.id, name: "Plant A", code: "PA", timeZone: "America/Chicago" },
    circuit.id,
    { tag: "CP-3", plannedExposureDays: 90 },
  );
  await outcomeOf(recordExchange(db.knex, w.users.tech, point3, { installSerial: "M-4", installedAt: daysAgoAt(80) }));
  const third = await outcomeOf(recordExchange(db.knex, w.users.tech, point3, { removedAt: daysAgoAt(1) }));
  if (!third.ok || !third.removedExposureId) throw new Error("fixture exchange failed");

  // the monitoring contractor's open-ended contract (one that has ended offers no "end" form)
  const contract = await db.knex("contracts").where({ contractor_id: w.monitoring.id }).first("id");
  const [client] = await db
    .knex("api_clients")
    .insert({
      owner_id: w.owner.id,
      name: "Old LIMS",
      token_hash: "0".repeat(64),
      token_hint: "wct_…0000",
      scopes: ["results:read"],
      created_by: w.users.admin.id,
    })
    .returning("id");
  const version = await db.knex("submissions").where({ id: sent.submissionId }).first("version");
  const surveys = await buildSurveyWorld(db.knex, w);
  const reviewSurvey = await surveys.submitSurvey([
    {
      id: surveyReadingId,
      cml: "TS-CML-01",
      measuredOn: "2026-11-20",
      thicknessMm: 2.75,
      flags: [flag.belowRequired("TS-CML-01", 2.75)],
    },
  ]);
  const surveyVersion = await db.knex("submissions").where({ id: reviewSurvey }).first("version");
  // The inspection contractor's draft survey of the circuit, with one CML.
  await db
    .knex("cmls")
    .insert({ id: SURVEY_CML, owner_id: w.owner.id, circuit_id: circuit.id, tag: "C-1-01", component: "pipe" });
  const survey = await startSurvey(db.knex, w.users.inspector, { siteId: w.site.id, circuitIds: [circuit.id] });
  const [cml] = await db
    .knex("cmls")
    .insert({ owner_id: w.owner.id, circuit_id: circuit.id, tag: "CML-1", component: "pipe" })
    .returning("id");
  ids = {
    site: w.site.id,
    point: w.point,
    labExposure: third.removedExposureId,
    draft: draft.submissionId,
    submitted: sent.submissionId,
    contract: contract.id,
    unit: circuit.unit_id,
    circuit: circuit.id,
    cml: cml.id,
    apiClient: client.id,
    member: w.users.manager.id,
    version: String(version.version),
    survey: survey.submissionId,
    reviewSurvey,
    surveyVersion: String(surveyVersion.version),
    surveyReading: surveyReadingId,
  };
}, 120_000);
afterAll(async () => {
  await shutdownApp();
  await db?.drop();
});

// ------------------------------------------------------------------ sending

const enc = encodeURIComponent;

/** The base body with `field` replaced by the bad value (a tick list gets the value as a box). */
function withBad(base: Body, field: string, f: Field, bad: Bad): string {
  const isTicks = f.kind === "ticks";
  const kept = base.filter(([k]) => (isTicks ? !k.startsWith(`${field}.`) : k !== field));
  const parts = kept.map(([k, v]) => `${enc(k)}=${enc(v)}`);
  const key = (v: string) => (isTicks ? `${field}.${v}` : field);
  if (typeof bad === "string") parts.push(isTicks ? `${enc(key(bad))}=on` : `${enc(field)}=${enc(bad)}`);
  else if ("raw" in bad) parts.push(isTicks ? `${enc(field)}.${bad.raw}=on` : `${enc(field)}=${bad.raw}`);
  else for (const v of bad.list) parts.push(`${enc(field)}=${enc(v)}`);
  return parts.join("&");
}

/** A multipart body by hand (so it can also be made wrong on purpose). */
function multipart(fields: Body, file?: { name: string; type: string; bytes: string | Buffer }) {
  const boundary = "----wallcastBoundary7MA4YWxk";
  const chunks: Buffer[] = [];
  for (const [k, v] of fields)
    chunks.push(Buffer.from(`--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`));
  if (file)
    chunks.push(
      Buffer.from(
        `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="${file.name}"\r\nContent-Type: ${file.type}\r\n\r\n`,
      ),
      Buffer.from(file.bytes),
      Buffer.from("\r\n"),
    );
  chunks.push(Buffer.from(`--${boundary}--\r\n`));
  return { type: `multipart/form-data; boundary=${boundary}`, body: Buffer.concat(chunks) };
}

type Sent = { status: number; text: string; type: string };

async function post(
  caller: Caller,
  path: string,
  contentType: string,
  body: string | Buffer,
  method: "post" | "delete" = "post",
): Promise<Sent> {
  const cookie = await cookieOf(caller, path === "/auth/logout");
  const agent = request(app);
  const res = await (method === "post" ? agent.post(path) : agent.delete(path))
    .set("Cookie", cookie)
    .set("Content-Type", contentType)
    .send(body)
    .redirects(0);
  return { status: res.status, text: res.text, type: String(res.headers["content-type"] ?? "") };
}

/** Below 500, one of the statuses bad input may get, a message for a 400, and nothing written. */
async function expectRefused(what: string, send: () => Promise<Sent>, allowed = [400, 403, 404, 409, 413, 415]) {
  const before = await fingerprint();
  const res = await send();
  expect(allowed, `${what}: status ${res.status} ${res.text.slice(0, 300)}`).toContain(res.status);
  if (res.status === 400) {
    if (res.type.includes("json")) expect(res.text, what).toMatch(/"detail":"[^"]+"/);
    else expect(res.text, `${what}: a message for the user`).toMatch(/role="alert"/);
  }
  expect(await fingerprint(), `${what}: nothing written`).toBe(before);
}

// ------------------------------------------------------------------ the tests

describe("the bad-input table", () => {
  it("has rows for every action of the build and every /api/v1 endpoint", async () => {
    const build = await loadBuild();
    const withAction = Object.entries(build.routes)
      .filter(([id, r]) => id !== "root" && (typeof r?.module.action === "function" || id.startsWith("routes/api.v1.")))
      .map(([id]) => id);
    const missing = withAction.filter((id) => !(id in table)).map((id) => `${id} has an action but no rows`);
    expect(missing).toEqual([]);
    expect(Object.keys(table).filter((id) => !withAction.includes(id))).toEqual([]);
    // a form's field that is not in its valid body would test nothing but the field's absence
    for (const [id, rows] of Object.entries(table))
      for (const form of rows.forms)
        for (const [name, f] of Object.entries(form.fields))
          if (f.kind !== "file" && f.kind !== "series" && f.kind !== "ticks" && name !== "couponMass")
            expect(
              form.base(ids).some(([k]) => k === name),
              `${id} ${form.name}: ${name} in the base body`,
            ).toBe(true);
  });
});

for (const [routeId, rows] of Object.entries(table)) {
  describe(routeId, () => {
    for (const form of rows.forms)
      for (const [field, f] of Object.entries(form.fields)) {
        const values = badValues(f);
        if (values.length === 0 || rows.multipart) continue;
        it(`${form.name}: ${field} (${f.kind})`, { timeout: 240_000 }, async () => {
          for (const caller of rows.callers)
            for (const bad of values)
              await expectRefused(`${caller} ${form.name} ${field}=${label(bad)}`, () =>
                post(
                  caller,
                  (form.path ?? rows.path)(ids),
                  "application/x-www-form-urlencoded",
                  withBad(form.base(ids), field, f, bad),
                ),
              );
        });
      }

    if (rows.intents)
      it("intents that do not exist", async () => {
        for (const caller of rows.callers)
          for (const intent of ["", "no-such-intent", "__proto__", "toString", "constructor", "createSite\u0000"]) {
            const base = rows.forms[0].base(ids).filter(([k]) => k !== "intent");
            await expectRefused(`${caller} intent=${JSON.stringify(intent)}`, () =>
              post(
                caller,
                rows.path(ids),
                "application/x-www-form-urlencoded",
                withBad(base, "intent", { kind: "text" }, intent),
              ),
            );
          }
      });

    it("bodies of the wrong kind", { timeout: 120_000 }, async () => {
      // Signing out works whatever the body says; the JSON endpoints answer 405 (the splat 404).
      const allowed =
        routeId === "routes/auth.logout"
          ? [302]
          : routeId === "routes/api.v1.splat"
            ? [404]
            : routeId.startsWith("routes/api.v1.") || routeId.startsWith("routes/attachments.")
              ? [405]
              : [400, 403, 404, 409, 413, 415];
      const base = rows.forms[0]?.base(ids) ?? [];
      const json = JSON.stringify(Object.fromEntries(base));
      const good = multipart(base);
      const bodies: Array<[string, string, string | Buffer]> = [
        ["JSON", "application/json", json],
        ["JSON with a lone surrogate", "application/json", '{"intent":"\\ud800","name":"\\ud800"}'],
        ["plain text", "text/plain", "intent=createSite&name=x"],
        ["multipart without its end", good.type, good.body.subarray(0, good.body.length - 20)],
        ["multipart with another boundary", "multipart/form-data; boundary=nothere", good.body],
        ["multipart without a boundary", "multipart/form-data", good.body],
        ["garbage as multipart", good.type, Buffer.from([0xff, 0xfe, 0x00, 0x01, 0x02])],
        ["a form with broken escapes", "application/x-www-form-urlencoded", "intent=%zz&name=%E0%A4%A&%%%=1"],
      ];
      for (const caller of rows.callers)
        for (const [what, type, body] of bodies)
          await expectRefused(`${caller} ${what}`, () => post(caller, rows.path(ids), type, body), allowed);
    });

    if (rows.multipart)
      it("multipart fields and files", { timeout: 120_000 }, async () => {
        const form = rows.forms[0];
        const png = Buffer.from(
          "89504e470d0a1a0a0000000d4948445200000001000000010806000000" +
            "1f15c4890000000d49444154789c6360000000000500010d0a2db40000000049454e44ae426082",
          "hex",
        );
        const cases: Array<[string, Body, { name: string; type: string; bytes: string | Buffer } | undefined]> = [];
        for (const [field, f] of Object.entries(form.fields))
          for (const bad of badValues(f))
            if (typeof bad === "string")
              cases.push([
                `${field}=${label(bad)}`,
                [...form.base(ids).filter(([k]) => k !== field), [field, bad]],
                {
                  name: "coupon.png",
                  type: "image/png",
                  bytes: png,
                },
              ]);
        cases.push(
          ["no file", form.base(ids), undefined],
          ["an empty file", form.base(ids), { name: "empty.csv", type: "text/csv", bytes: "" }],
          [
            "a binary file",
            form.base(ids),
            { name: "x.csv", type: "text/csv", bytes: Buffer.from([0, 1, 2, 3, 0xff]) },
          ],
          [
            "a file name with control characters",
            form.base(ids),
            { name: "a\u0001\u0000b.csv", type: "text/csv", bytes: "coupon_serial\r\nM-4\u0000\r\n" },
          ],
          [
            "a CSV with control characters and a huge pit list",
            form.base(ids),
            {
              name: "lab.csv",
              type: "text/csv",
              bytes: `coupon_serial,cleaning_method,final_mass_g,pit_depths_mm,lab_notes\r\nM-4,a\u0001b,35.9,"${hugeList(200_000)}",x\u001fy\r\n`,
            },
          ],
          [
            "a CSV with numbers that are not numbers",
            form.base(ids),
            {
              name: "lab.csv",
              type: "text/csv",
              bytes: "coupon_serial,final_mass_g,pit_depths_mm\r\nM-4,NaN,Infinity\r\nM-4,1e309,0x10\r\n",
            },
          ],
        );
        for (const caller of rows.callers)
          for (const [what, fields, file] of cases) {
            const m = multipart(fields, file);
            await expectRefused(`${caller} ${what}`, () => post(caller, rows.path(ids), m.type, m.body));
          }
      });
  });
}

describe("ids that are not UUIDs in the path", () => {
  it("are a 404 for every action with an id, and nothing is written", { timeout: 120_000 }, async () => {
    const paths = [
      (x: string) => `/contracts/${x}`,
      (x: string) => `/setup/sites/${x}`,
      (x: string) => `/setup/points/${x}`,
      (x: string) => `/setup/circuits/${x}`,
      (x: string) => `/pulls/${x}/exchange`,
      (x: string) => `/lab/${x}`,
      (x: string) => `/lab/${x}/attachments`,
      (x: string) => `/submissions/${x}`,
      (x: string) => `/review/${x}`,
      (x: string) => `/surveys/${x}`,
      (x: string) => `/surveys/${x}/import`,
      (x: string) => `/surveys/${x}/attachments`,
    ];
    const callers: Caller[] = ["admin", "engineer", "tech"];
    for (const path of paths)
      for (const x of [
        "not-a-uuid",
        "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d1g",
        "%27%20or%201%3D1",
        "%00",
        "x".repeat(5000),
      ])
        for (const caller of callers)
          await expectRefused(
            `${caller} ${path(x).slice(0, 60)}`,
            () => post(caller, path(x), "application/x-www-form-urlencoded", "intent=update"),
            [403, 404, 414, 431],
          );
    // removing an attachment by an id that is not one
    for (const id of ["not-a-uuid", "", "%00"])
      await expectRefused(
        `DELETE attachment ${id}`,
        () => post("tech", `/lab/${ids.labExposure}/attachments?id=${id}`, "text/plain", "", "delete"),
        [404],
      );
  });
});

describe("JSON endpoints' query parameters", () => {
  it("GET /api/v1/submissions/:id with ids that are not UUIDs", async () => {
    for (const x of ["not-a-uuid", "7d0c8a53-2f0e-4b7c-9a51-2b1f4c3e9d1g", "%00", "%ED%A0%80", "x".repeat(2000)]) {
      const res = await request(app)
        .get(`/api/v1/submissions/${x}`)
        .set("Cookie", await cookieOf("engineer"));
      // bytes that are not UTF-8 in the path are refused by the router before the route (400)
      expect([400, 404], `${x.slice(0, 40)}: ${res.status}`).toContain(res.status);
      if (res.status === 404) expect(res.headers["content-type"]).toContain("application/problem+json");
      expect(res.text.length, x.slice(0, 40)).toBeGreaterThan(0);
    }
  });

  for (const q of apiQueries)
    it(`GET ${q.path({} as Ids)}`, { timeout: 120_000 }, async () => {
      for (const [param, f] of Object.entries(q.params)) {
        const values: string[] =
          f === "cursor"
            ? cursorBad(ids)
            : badValues(f).filter((b): b is string => typeof b === "string" && !isUuid(b));
        for (const caller of q.callers ?? (["engineer", "tech"] as const))
          for (const v of values) {
            const raw = v.startsWith("%") ? v : enc(v);
            const res = await request(app)
              .get(`${q.path(ids)}?${param}=${raw}`)
              .set("Cookie", await cookieOf(caller));
            const what = `${caller} ${param}=${v.slice(0, 40)}`;
            expect(res.status, `${what}: ${res.text.slice(0, 300)}`).toBe(400);
            expect(res.headers["content-type"]).toContain("application/problem+json");
            expect(res.body.detail, what).toBeTruthy();
            expect(res.body.field, what).toBe(param);
          }
      }
    });
});

describe("page filters in the query string", () => {
  it("take only their own states (not the names every object has)", async () => {
    for (const status of ["constructor", "toString", "__proto__", "%00", "%ED%A0%80"]) {
      const res = await request(app)
        .get(`/submissions?status=${status}`)
        .set("Cookie", await cookieOf("tech"));
      expect(res.status, status).toBe(200);
      expect(res.text, status).not.toContain("Show all submissions");
    }
  });
});
