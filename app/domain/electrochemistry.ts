/**
 * Electrochemical corrosion rates: equivalent weight, Stern–Geary constant,
 * corrosion current density and Faraday-law penetration rate.
 *
 * Standards: ASTM G102 (equivalent weight EW = 1/Σ(nᵢ·fᵢ/Wᵢ); CR = K₁·i·EW/ρ,
 * K₁ = 3.27×10⁻³ mm·g/(µA·cm·y); MR = K₂·i·EW, K₂ = 8.954×10⁻³
 * g·cm²/(µA·m²·d) [mem]); ASTM G59 (polarisation resistance, i = B/Rp [pub]);
 * Stern–Geary B = βa·βc / (ln10·(βa + βc)) [mem]. The Faraday constant is
 * exact since the 2019 SI redefinition; K₁ and K₂ are derived from it and
 * the 8760-hour year rather than typed in [der].
 */

import { FARADAY_C_PER_MOL, MM_PER_MIL, SECONDS_PER_YEAR } from "./units.ts";
import {
  rangeError,
  requireNonNegative,
  requireObject,
  requirePositive,
  requirePositiveOrInfinity,
  FieldRangeError,
} from "./validate.ts";

/**
 * Standard atomic weights, g/mol: IUPAC conventional (abridged) values,
 * recalled [mem]; the unit tests cross-check every entry against an
 * independent atomic-mass package.
 */
export const ATOMIC_WEIGHTS: Readonly<Record<string, number>> = {
  Li: 6.94,
  Be: 9.0121831,
  B: 10.81,
  C: 12.011,
  N: 14.007,
  Mg: 24.305,
  Al: 26.9815385,
  Si: 28.085,
  P: 30.973762,
  S: 32.06,
  Ti: 47.867,
  V: 50.9415,
  Cr: 51.9961,
  Mn: 54.938044,
  Fe: 55.845,
  Co: 58.933194,
  Ni: 58.6934,
  Cu: 63.546,
  Zn: 65.38,
  Ga: 69.723,
  Zr: 91.224,
  Nb: 92.90637,
  Mo: 95.95,
  Pd: 106.42,
  Ag: 107.8682,
  Cd: 112.414,
  In: 114.818,
  Sn: 118.71,
  Sb: 121.76,
  Hf: 178.49,
  Ta: 180.94788,
  W: 183.84,
  Pt: 195.084,
  Au: 196.96657,
  Pb: 207.2,
  Bi: 208.9804,
};

/**
 * Default valences (electrons per atom oxidised), chosen element by element —
 * not one rule such as "the lowest oxidation state" (copper 2 and titanium 4
 * are not their lowest states). Where ASTM G102's appendix of equivalent
 * weights for common alloys lists the element, the default is the valence it
 * uses there [mem — recalled, confirm against a licensed copy]; with Fe 2,
 * Cr 3, Ni 2, Mo 3 the G102 equivalent weights of types 304 and 316 are
 * reproduced. The other elements take the oxidation state of the ion they
 * usually form when they corrode in water [cp]. DEFAULT_VALENCE_SOURCES gives
 * the tag per element. Pass `valenceBySymbol` when the process is known to
 * differ (e.g. Cu 1 in chloride, Sn 4, Fe 3). Non-metals (C, N, P, S, B)
 * have no default and must be given a valence if included at all.
 */
export const DEFAULT_VALENCES: Readonly<Record<string, number>> = {
  Li: 1,
  Be: 2,
  Mg: 2,
  Al: 3,
  Si: 4,
  Ti: 4,
  V: 5,
  Cr: 3,
  Mn: 2,
  Fe: 2,
  Co: 2,
  Ni: 2,
  Cu: 2,
  Zn: 2,
  Ga: 3,
  Zr: 4,
  Nb: 5,
  Mo: 3,
  Pd: 2,
  Ag: 1,
  Cd: 2,
  In: 3,
  Sn: 2,
  Sb: 3,
  Hf: 4,
  Ta: 5,
  W: 6,
  Pt: 2,
  Au: 3,
  Pb: 2,
  Bi: 3,
};

const G102_VALENCE = "ASTM G102 appendix valence for common alloys [mem]";
const AQUEOUS_ION = "usual ion in aqueous corrosion [cp]";
const FROM_G102 = new Set([
  "Mg",
  "Al",
  "Si",
  "Ti",
  "Cr",
  "Mn",
  "Fe",
  "Co",
  "Ni",
  "Cu",
  "Zn",
  "Nb",
  "Mo",
  "Ag",
  "Cd",
  "Sn",
  "Ta",
  "W",
  "Pb",
  "V",
]);

/** Where each default valence comes from. */
export const DEFAULT_VALENCE_SOURCES: Readonly<Record<string, string>> = Object.freeze(
  Object.fromEntries(Object.keys(DEFAULT_VALENCES).map((s) => [s, FROM_G102.has(s) ? G102_VALENCE : AQUEOUS_ION])),
);

/** A composition must account for the whole alloy: G102 gives the base element the balance. */
const MINIMUM_TOTAL_PERCENT = 99;

/**
 * Equivalent weight of a metal or alloy, g per mole of electrons, ASTM G102:
 * EW = 1 / Σ(nᵢ·fᵢ/Wᵢ) over exactly the elements given, fᵢ = percent/100,
 * no renormalising (give the balance element its balance, as G102 does;
 * G102 counts elements above about 1 %). The percentages must total from
 * 99 % to 100.5 %: less means the balance element was left out. Missing
 * valences come from DEFAULT_VALENCES.
 */
export function equivalentWeight(
  massPercentBySymbol: Record<string, number>,
  valenceBySymbol?: Record<string, number>,
): number {
  requireObject("massPercentBySymbol", massPercentBySymbol);
  if (valenceBySymbol !== undefined) requireObject("valenceBySymbol", valenceBySymbol);
  const symbols = Object.keys(massPercentBySymbol);
  if (symbols.length === 0)
    throw rangeError("massPercentBySymbol", "a composition with at least one element", massPercentBySymbol);
  let totalPercent = 0;
  let electronsPerGram = 0;
  for (const symbol of symbols) {
    const weight = Object.prototype.hasOwnProperty.call(ATOMIC_WEIGHTS, symbol) ? ATOMIC_WEIGHTS[symbol] : undefined;
    if (weight === undefined) {
      throw rangeError(
        `massPercentBySymbol.${symbol}`,
        "an element symbol of the library's atomic-weight table",
        symbol,
      );
    }
    const percent = massPercentBySymbol[symbol];
    if (typeof percent !== "number" || !(percent >= 0) || !(percent <= 100)) {
      throw rangeError(`massPercentBySymbol.${symbol}`, ">= 0 and <= 100 (mass percent)", percent);
    }
    totalPercent += percent;
    let valence: number | undefined =
      valenceBySymbol !== undefined && Object.prototype.hasOwnProperty.call(valenceBySymbol, symbol)
        ? valenceBySymbol[symbol]
        : undefined;
    if (valence === undefined) {
      valence = Object.prototype.hasOwnProperty.call(DEFAULT_VALENCES, symbol) ? DEFAULT_VALENCES[symbol] : undefined;
      if (valence === undefined) {
        throw new FieldRangeError(
          `valenceBySymbol.${symbol}`,
          `valenceBySymbol.${symbol} must be given (got undefined): the library has no default valence for ${symbol}`,
        );
      }
    } else if (typeof valence !== "number" || !Number.isInteger(valence) || valence < 1 || valence > 8) {
      throw rangeError(`valenceBySymbol.${symbol}`, "an integer from 1 to 8", valence);
    }
    electronsPerGram += (valence * (percent / 100)) / weight;
  }
  // A little over 100 % is rounding in a certificate; much more is a typing error.
  if (totalPercent > 100.5) {
    throw rangeError("massPercentBySymbol", "a composition totalling <= 100 %", totalPercent);
  }
  if (totalPercent < MINIMUM_TOTAL_PERCENT) {
    throw rangeError(
      "massPercentBySymbol",
      `a composition totalling >= ${MINIMUM_TOTAL_PERCENT} % (give the base element the balance)`,
      totalPercent,
    );
  }
  if (!(electronsPerGram > 0)) {
    throw rangeError("massPercentBySymbol", "a composition with at least one element above 0 %", totalPercent);
  }
  return 1 / electronsPerGram;
}

/**
 * Stern–Geary constant B in mV from the Tafel slopes in mV/decade:
 * B = βa·βc / (ln10·(βa + βc)). Either slope may be Infinity (a
 * diffusion-limited or passive branch), giving B = β/ln10 of the other;
 * both infinite throws. ln 10 = 2.302585… is used exactly where textbooks
 * print 2.303 (0.02 % apart).
 */
export function sternGearyB(betaAnodicMvPerDecade: number, betaCathodicMvPerDecade: number): number {
  const ba = requirePositiveOrInfinity("betaAnodicMvPerDecade", betaAnodicMvPerDecade);
  const bc = requirePositiveOrInfinity("betaCathodicMvPerDecade", betaCathodicMvPerDecade);
  if (ba === Infinity && bc === Infinity) {
    throw new FieldRangeError(
      "betaAnodicMvPerDecade",
      "betaAnodicMvPerDecade must be finite when betaCathodicMvPerDecade is Infinity (got Infinity)",
    );
  }
  // B = βa·βc / (ln10 (βa + βc)) written as 1 / (ln10 (1/βa + 1/βc)): the same value,
  // without overflow for very large slopes, and βc → ∞ gives βa / ln10 on its own.
  return 1 / (Math.LN10 * (1 / ba + 1 / bc));
}

/**
 * Corrosion current density in µA/cm², ASTM G59 / G102: i = B / Rp.
 * B in mV over Rp in Ω·cm² gives mA/cm²; × 1000 for µA/cm².
 */
export function corrosionCurrentDensity(input: { bMv: number; polarizationResistanceOhmCm2: number }): number {
  requireObject("input", input);
  const b = requirePositive("bMv", input.bMv);
  const rp = requirePositive("polarizationResistanceOhmCm2", input.polarizationResistanceOhmCm2);
  return (b * 1000) / rp;
}

/**
 * K₁ = 10⁻⁶ A/µA × 10 mm/cm × 31 536 000 s/y ÷ F = 3.268×10⁻³ mm·g/(µA·cm·y)
 * (G102 prints 3.27×10⁻³) [der].
 */
export const K1_MM_G_PER_UA_CM_Y = (1e-6 * 10 * SECONDS_PER_YEAR) / FARADAY_C_PER_MOL;
/**
 * K₂ = 10⁻⁶ A/µA × 10⁴ cm²/m² × 86 400 s/d ÷ F = 8.954×10⁻³ g·cm²/(µA·m²·d)
 * (as G102 prints) [der].
 */
export const K2_G_CM2_PER_UA_M2_D = (1e-6 * 1e4 * 86400) / FARADAY_C_PER_MOL;

/**
 * Penetration and mass-loss rates from a corrosion current density,
 * Faraday's law as ASTM G102: CR = K₁·i·EW/ρ (mm/y, 8760-hour year),
 * mpy = mm/y ÷ 0.0254, MR = K₂·i·EW (g/(m²·d)).
 */
export function faradayRate(input: { currentDensityUAcm2: number; equivalentWeight: number; densityGcm3: number }): {
  mmPerYear: number;
  mpy: number;
  gPerM2PerDay: number;
} {
  requireObject("input", input);
  const i = requireNonNegative("currentDensityUAcm2", input.currentDensityUAcm2);
  const ew = requirePositive("equivalentWeight", input.equivalentWeight);
  const rho = requirePositive("densityGcm3", input.densityGcm3);
  const mmPerYear = (K1_MM_G_PER_UA_CM_Y * i * ew) / rho;
  return { mmPerYear, mpy: mmPerYear / MM_PER_MIL, gPerM2PerDay: K2_G_CM2_PER_UA_M2_D * i * ew };
}
