import { CartesianGrid, Legend, Line, LineChart, ReferenceDot, Tooltip, XAxis, YAxis } from "recharts";
import type { Units } from "../context";
import { mmPerYearToMpy } from "../domain/index.ts";
import { formatLocalDate } from "../services/time";

export type TrendPoint = {
  removedAt: string;
  generalMmPerYear: number;
  pittingMmPerYear: number | null;
  current?: boolean;
};

/**
 * A point's approved coupon rates over time (general and pitting), in the user's units,
 * with the submission under review marked. Small and fixed-size so it renders on the server.
 */
export function TrendChart({
  points,
  units,
  title,
  timeZone,
}: {
  points: TrendPoint[];
  units: Units;
  title: string;
  /** The site's zone: a pull's date is the day it was removed there. */
  timeZone: string;
}) {
  const conv = (v: number | null) => (v === null ? null : units === "us" ? mmPerYearToMpy(v) : v);
  const unit = units === "us" ? "mpy" : "mm/y";
  const data = points.map((p) => ({
    date: formatLocalDate(p.removedAt, timeZone),
    general: conv(p.generalMmPerYear),
    pitting: conv(p.pittingMmPerYear),
    current: p.current,
  }));
  const current = data.find((d) => d.current);
  if (data.length < 2) {
    return <p className="text-xs text-ink-faint">Not enough approved history at this point for a trend yet.</p>;
  }
  return (
    <figure aria-label={title}>
      <LineChart width={420} height={180} data={data} margin={{ top: 8, right: 12, bottom: 4, left: 0 }}>
        <CartesianGrid stroke="#e6e6e0" strokeDasharray="3 3" />
        <XAxis dataKey="date" tick={{ fontSize: 10 }} minTickGap={24} />
        <YAxis
          tick={{ fontSize: 10 }}
          width={48}
          label={{ value: unit, angle: -90, position: "insideLeft", fontSize: 10 }}
        />
        <Tooltip formatter={(v) => `${Number(v).toFixed(units === "us" ? 2 : 3)} ${unit}`} />
        <Legend wrapperStyle={{ fontSize: 11 }} />
        <Line
          type="monotone"
          dataKey="general"
          name="general rate"
          stroke="#1b4f5c"
          strokeWidth={2}
          dot={{ r: 2 }}
          isAnimationActive={false}
        />
        <Line
          type="monotone"
          dataKey="pitting"
          name="pitting rate"
          stroke="#a44f1c"
          strokeDasharray="5 3"
          strokeWidth={1.5}
          dot={{ r: 2 }}
          connectNulls
          isAnimationActive={false}
        />
        {current ? (
          <ReferenceDot x={current.date} y={current.general ?? 0} r={5} fill="none" stroke="#1d2125" strokeWidth={2} />
        ) : null}
      </LineChart>
      <figcaption className="text-xs text-ink-faint">
        {title}: approved pulls by removal date ({timeZone}), solid general rate, dashed pitting rate
        {current ? "; the circled pull is this submission’s" : ""}.
      </figcaption>
    </figure>
  );
}
