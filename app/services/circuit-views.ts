/**
 * The shapes the set-up screens show for a circuit's design, shared by the circuits model and
 * the component kit (components import no .server module, not even its types).
 */

/** What the set-up pages say about a circuit's required thickness. */
export type RequiredThicknessView =
  | { status: "missing"; missing: string[] }
  | { status: "not-applicable"; message: string }
  | {
      status: "ok";
      requiredMm: number;
      pressureDesignMm: number;
      structuralMinimumMm: number;
      governedBy: "pressure-design" | "structural-minimum" | "owner-minimum";
      /** The owner's reason, when their structural minimum is used. */
      ownerReason: string | null;
      nps: number | null;
      y: number;
      yFromTable: boolean;
      corrosionAllowanceMm: number | null;
    };

/** Where the outside diameter and nominal wall came from, when from the pipe tables. */
export type TableSourceView = { outsideDiameter: string | null; nominalWall: string | null };
