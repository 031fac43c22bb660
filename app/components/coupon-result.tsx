import { SeverityBadge, type SeverityWord } from "./badges";
import type { CouponGeometry, MassLossMethod } from "../domain/index.ts";

/** How the mass loss was obtained, in words (the same on the form and on the review page). */
export const massLossMethodWords: Record<MassLossMethod, string> = {
  "final-mass": "initial − final mass",
  "blank-corrected": "initial − final mass, less the blank’s loss over the same cycles",
  "cleaning-curve": "ASTM G1 §7 cleaning curve extrapolated to zero cycles",
};

export type FlagView = { code: string; severity: "warning" | "info"; message: string };

/** Quality flags in words, warnings marked as such (never by colour alone). */
export function FlagList({ flags, testId }: { flags: FlagView[]; testId?: string }) {
  return (
    <ul className="mt-1 space-y-1 text-sm" data-testid={testId}>
      {flags.map((f) => (
        <li key={f.code} className={`flex gap-1.5 ${f.severity === "warning" ? "text-warn" : "text-ink-soft"}`}>
          {/* A shape as well as a word and a colour: a triangle for a warning, a circle for a note. */}
          <span aria-hidden="true" className="font-semibold">
            {f.severity === "warning" ? "▲" : "●"}
          </span>
          <span>
            <span className="font-medium">{f.severity === "warning" ? "Warning" : "Note"}:</span> {f.message}
          </span>
        </li>
      ))}
    </ul>
  );
}

/**
 * A severity grade, or the words for a result that is not graded: not determinable (no
 * rate), or no thresholds for the coupon's material. Never a borrowed carbon-steel band.
 */
export function Grade({
  value,
  basis,
  emphasise = false,
}: {
  value: SeverityWord | null | undefined;
  basis?: string | null;
  emphasise?: boolean;
}) {
  if (value) return <SeverityBadge value={value} emphasise={emphasise} />;
  return (
    <span className="text-xs text-ink-soft" title={basis ?? undefined}>
      {basis && basis.startsWith("not graded") ? basis : "not graded"}
    </span>
  );
}

/** The pitting factor with the same two decimals on every page; "—" without a mass loss. */
export const formatPittingFactor = (factor: number | null | undefined): string =>
  factor === null || factor === undefined || !Number.isFinite(factor) ? "—" : factor.toFixed(2);

/** Shown where a rate would be when the mass loss gives none. */
export function NotDeterminable({ reason }: { reason?: string | null }) {
  return (
    <span className="text-ink-soft" title={reason ?? undefined}>
      not determinable
    </span>
  );
}

/** A coupon's shape and dimensions as they were used for its area, in mm. */
export function describeGeometry(g: CouponGeometry): string {
  const hole = (d?: number) => (d ? `, hole ⌀ ${d} mm` : "");
  switch (g.shape) {
    case "strip":
      return `strip ${g.lengthMm} × ${g.widthMm} × ${g.thicknessMm} mm${hole(g.holeDiameterMm)}`;
    case "disc":
      return `disc ⌀ ${g.diameterMm} × ${g.thicknessMm} mm${hole(g.holeDiameterMm)}`;
    case "rod":
      return `rod ⌀ ${g.diameterMm} × ${g.lengthMm} mm, ${g.exposedEnds} end${g.exposedEnds === 1 ? "" : "s"} wetted`;
    default:
      return `flush disc ⌀ ${g.diameterMm} mm, one face wetted`;
  }
}
