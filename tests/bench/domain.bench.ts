/**
 * Throughput of the calculation library's hot functions — the ones a fleet
 * recompute calls hundreds of thousands of times.
 *
 *   npm run bench:domain
 *
 * Prints one line per function, then, as the very last line of output, one
 * JSON object with a `<functionName>OpsPerS` key per function. Target: at
 * least 1,000,000 operations per second each (thicknessRates with three
 * readings). Each figure is the median of several timed rounds after a
 * warm-up, so one slow round (a GC pause, a busy neighbour) does not decide it.
 */

import {
  couponArea,
  faradayRate,
  formatIsoDay,
  nextInspection,
  parseIsoDay,
  pittingRate,
  remainingLife,
  severity,
  thicknessRates,
  weightLossRate,
} from "../../app/domain/index.ts";
import type { PipingClass, ThicknessReading } from "../../app/domain/index.ts";

const TARGET_OPS_PER_S = 1_000_000;
const VARIANTS = 1024; // distinct inputs, cycled, so nothing is constant-folded or cached
const ROUNDS = 5;
const ROUND_MS = 300;
const WARMUP_CALLS = 300_000;

/** Deterministic pseudo-random numbers (mulberry32), so every run measures the same inputs. */
function random(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

const rand = random(20240101);
const between = (lo: number, hi: number) => lo + (hi - lo) * rand();

const couponInputs = Array.from({ length: VARIANTS }, () => ({
  massLossG: between(0.001, 1),
  areaCm2: between(10, 40),
  exposureHours: between(700, 3000),
  densityGcm3: between(7.8, 8.0),
}));

const stripInputs = Array.from({ length: VARIANTS }, () => ({
  shape: "strip" as const,
  lengthMm: between(70, 80),
  widthMm: between(12, 20),
  thicknessMm: between(1, 3),
  holeDiameterMm: between(0, 8),
}));

const pitInputs = Array.from({ length: VARIANTS }, () => ({
  maxPitDepthMm: between(0, 1),
  exposureHours: between(700, 3000),
}));

const faradayInputs = Array.from({ length: VARIANTS }, () => ({
  currentDensityUAcm2: between(0.1, 100),
  equivalentWeight: between(25, 28),
  densityGcm3: between(7.8, 8),
}));

const severityRates = Array.from({ length: VARIANTS }, () => between(0, 0.5));

const startDay = parseIsoDay("start", "2005-01-01");
const readingSets: ThicknessReading[][] = Array.from({ length: VARIANTS }, () => {
  let day = startDay + Math.floor(between(0, 2000));
  let thickness = between(8, 12);
  return Array.from({ length: 3 }, () => {
    const reading = { date: formatIsoDay(day), thicknessMm: thickness };
    day += 200 + Math.floor(between(0, 1500));
    thickness -= between(-0.05, 0.6);
    return reading;
  });
});

const lifeInputs = Array.from({ length: VARIANTS }, () => ({
  actualMm: between(3, 12),
  requiredMm: between(2, 6),
  rateMmPerYear: between(-0.05, 0.5),
}));

const classes: PipingClass[] = [1, 2, 3, 4, "injection"];
const inspectionInputs = Array.from({ length: VARIANTS }, (_, i) => ({
  remainingLifeYears: between(0, 60),
  pipingClass: classes[i % classes.length],
  inspectedOn: formatIsoDay(startDay + Math.floor(between(0, 7000))),
}));

/** A benchmark body: call the function for variant `i` and return something numeric to keep. */
type Body = (i: number) => number;

const bodies: Record<string, Body> = {
  weightLossRate: (i) => weightLossRate(couponInputs[i]).mmPerYear,
  thicknessRates: (i) => thicknessRates(readingSets[i]).longTermMmPerYear,
  remainingLife: (i) => remainingLife(lifeInputs[i]),
  nextInspection: (i) => nextInspection(inspectionInputs[i]).intervalYears,
  couponArea: (i) => couponArea(stripInputs[i]),
  pittingRate: (i) => pittingRate(pitInputs[i]).mmPerYear,
  severity: (i) => severity("general", severityRates[i]).length,
  faradayRate: (i) => faradayRate(faradayInputs[i]).mmPerYear,
};

let sink = 0; // consumed at the end so the calls cannot be optimised away

function measure(body: Body): number {
  for (let n = 0; n < WARMUP_CALLS; n++) sink += body(n & (VARIANTS - 1)) === Infinity ? 1 : 0;
  const rounds: number[] = [];
  for (let r = 0; r < ROUNDS; r++) {
    let calls = 0;
    const start = process.hrtime.bigint();
    let elapsedNs = 0;
    while (elapsedNs < ROUND_MS * 1e6) {
      for (let n = 0; n < 50_000; n++) {
        const value = body(n & (VARIANTS - 1));
        if (value !== value) sink++; // NaN never happens; the branch keeps the result alive
      }
      calls += 50_000;
      elapsedNs = Number(process.hrtime.bigint() - start);
    }
    rounds.push(calls / (elapsedNs / 1e9));
  }
  rounds.sort((a, b) => a - b);
  return rounds[Math.floor(rounds.length / 2)];
}

const results: Record<string, number> = {};
console.log(`Wallcast domain benchmark — Node ${process.version}, median of ${ROUNDS} × ${ROUND_MS} ms rounds`);
for (const [name, body] of Object.entries(bodies)) {
  const opsPerS = measure(body);
  results[`${name}OpsPerS`] = Math.round(opsPerS);
  const verdict = opsPerS >= TARGET_OPS_PER_S ? "ok" : "BELOW TARGET";
  console.log(`${name.padEnd(16)} ${Math.round(opsPerS).toLocaleString("en-US").padStart(14)} ops/s  ${verdict}`);
}
const below = Object.entries(results).filter(([, v]) => v < TARGET_OPS_PER_S);
console.log(
  below.length === 0
    ? `All functions meet the target of ${TARGET_OPS_PER_S.toLocaleString("en-US")} ops/s (check sum ${sink}).`
    : `Below the target of ${TARGET_OPS_PER_S.toLocaleString("en-US")} ops/s: ${below.map(([k]) => k).join(", ")} (check sum ${sink}).`,
);
console.log(JSON.stringify(results));
