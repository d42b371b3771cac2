/** The caution every report carries. */
export const CAUTION =
  'Caution: plateau informs measurement decisions; it is not a safety system. Do not use its alerts as interlocks, follow the rig\'s own safety procedures, and defer to local codes, accredited calibration procedures and licensed practice.';
