/** Carried by every result, printed with every human summary, and stated in the README. */
export const CAUTION =
  'Screening-level result. Outputs need review by a qualified hydrogeologist before any decision; local regulations and licensed practice govern.';
