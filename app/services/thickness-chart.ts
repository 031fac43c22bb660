import { addDays, formatIsoDay, parseIsoDay } from "../domain/index.ts";

/**
 * The one set of numbers a CML's thickness-over-time chart is drawn from, on the circuit
 * page (recharts) and in the PDF reports (react-pdf's Svg): the approved readings, the
 * base-line, the required-thickness line and the projection from the last reading to the
 * required thickness at the CML's governing rate. Pure, shared by the browser and the server.
 *
 * `day` is the day number of the ISO date (days since 1970-01-01), so both drawings place
 * points on one linear time axis.
 */

export type ChartPoint = {
  day: number;
  date: string;
  thicknessMm: number;
  /** reading: an approved reading of the current component; earlier: before the latest replacement; baseline: the base-line. */
  kind: "reading" | "earlier" | "baseline";
};

export type ThicknessChart = {
  cmlTag: string;
  points: ChartPoint[];
  requiredMm: number | null;
  /** From the last reading to where the wall meets required thickness (or to the chart's end). */
  projection: {
    from: ChartPoint;
    to: { day: number; date: string; thicknessMm: number };
    reachesRequired: boolean;
  } | null;
  /** When the projected date lies beyond the chart's end, that date in words for a note. */
  projectedBeyond: string | null;
  xDomain: [number, number];
  yDomain: [number, number];
};

/** The chart shows at most this many years past the last reading. */
export const PROJECTION_YEARS_SHOWN = 25;

export type ChartInput = {
  cmlTag: string;
  baseline: { thicknessMm: number | null; on: string | null };
  /** The latest replacement's date: readings before it are drawn as an earlier component. */
  replacedOn: string | null;
  readings: Array<{ measuredOn: string; thicknessMm: number }>;
  requiredMm: number | null;
  governingRateMmPerYear: number | null;
  projectedRequiredOn: string | null;
};

export function thicknessChart(input: ChartInput): ThicknessChart {
  const replaced = input.replacedOn === null ? null : parseIsoDay("replacedOn", input.replacedOn);
  const points: ChartPoint[] = [];
  if (input.baseline.thicknessMm !== null && input.baseline.on !== null) {
    const day = parseIsoDay("baseline.on", input.baseline.on);
    points.push({ day, date: input.baseline.on, thicknessMm: input.baseline.thicknessMm, kind: "baseline" });
  }
  for (const r of input.readings) {
    const day = parseIsoDay("measuredOn", r.measuredOn);
    points.push({
      day,
      date: r.measuredOn,
      thicknessMm: r.thicknessMm,
      kind: replaced !== null && day < replaced ? "earlier" : "reading",
    });
  }
  points.sort((a, b) => a.day - b.day || (a.kind === "baseline" ? -1 : 1));

  const current = points.filter((p) => p.kind === "reading");
  const last = current[current.length - 1] ?? null;
  let projection: ThicknessChart["projection"] = null;
  let projectedBeyond: string | null = null;
  const rate = input.governingRateMmPerYear;
  if (last && input.requiredMm !== null && rate !== null && rate > 0 && last.thicknessMm > input.requiredMm) {
    const endDay = parseIsoDay("end", addDays(last.date, Math.round(PROJECTION_YEARS_SHOWN * 365.25)));
    const reachDay =
      input.projectedRequiredOn !== null
        ? parseIsoDay("projectedRequiredOn", input.projectedRequiredOn)
        : last.day + Math.round(((last.thicknessMm - input.requiredMm) / rate) * 365.25);
    if (reachDay <= endDay) {
      projection = {
        from: last,
        to: { day: reachDay, date: formatIsoDay(reachDay), thicknessMm: input.requiredMm },
        reachesRequired: true,
      };
    } else {
      const atEnd = last.thicknessMm - (rate * (endDay - last.day)) / 365.25;
      projection = {
        from: last,
        to: { day: endDay, date: formatIsoDay(endDay), thicknessMm: Math.round(atEnd * 1000) / 1000 },
        reachesRequired: false,
      };
      projectedBeyond = formatIsoDay(reachDay);
    }
  }

  const days = points.map((p) => p.day);
  if (projection) days.push(projection.to.day);
  const values = points.map((p) => p.thicknessMm);
  if (input.requiredMm !== null) values.push(input.requiredMm);
  if (projection) values.push(projection.to.thicknessMm);
  const least = (list: number[]) => list.reduce((a, b) => (b < a ? b : a), Infinity);
  const most = (list: number[]) => list.reduce((a, b) => (b > a ? b : a), -Infinity);
  const xDomain: [number, number] = days.length === 0 ? [0, 1] : [least(days), Math.max(most(days), least(days) + 30)];
  const lo = values.length === 0 ? 0 : least(values);
  const hi = values.length === 0 ? 1 : most(values);
  const pad = Math.max((hi - lo) * 0.1, 0.1);
  const yDomain: [number, number] = [Math.max(0, Math.floor((lo - pad) * 10) / 10), Math.ceil((hi + pad) * 10) / 10];
  return {
    cmlTag: input.cmlTag,
    points,
    requiredMm: input.requiredMm,
    projection,
    projectedBeyond,
    xDomain,
    yDomain,
  };
}
