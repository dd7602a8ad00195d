// "Is the cohort big enough?": events and non-events of a cohort or run against the usual minimums for external
// validation, and the precision (expected 95% CI width) the cohort gives. One verdict function serves the server
// (run and cohort-version responses) and the client (the adequacy panel and the sample-size planner).
//   Minimum: at least 100 events and 100 non-events — Vergouwe Y, Steyerberg EW, Eijkemans MJC, Habbema JDF (2005),
//            Substantial effective sample sizes were required for external validation studies of predictive logistic
//            regression models. J Clin Epidemiol 58:475–483.
//   Preferred: 200 or more events and 200 or more non-events — Collins GS, Ogundimu EO, Altman DG (2016), Sample size
//            considerations for the external validation of a multivariable prognostic model: a resampling study.
//            Stat Med 35:214–226.
//   Precision: Riley RD, Debray TPA, Collins GS, et al. (2021), Stat Med 40:4230–4251 (server/src/stats/sampleSize.ts).
import { formatCount } from './format';

export const MINIMUM_EACH = 100;
export const PREFERRED_EACH = 200;

export const ADEQUACY_SOURCES = {
  minimum: 'Vergouwe Y, Steyerberg EW, Eijkemans MJC, Habbema JDF (2005), Journal of Clinical Epidemiology 58:475–483',
  preferred: 'Collins GS, Ogundimu EO, Altman DG (2016), Statistics in Medicine 35:214–226',
  precision: 'Riley RD, Debray TPA, Collins GS, et al. (2021), Statistics in Medicine 40:4230–4251',
} as const;

/** 'short' = below 100/100; 'minimum' = 100/100 met but not 200/200; 'preferred' = 200/200 met. */
export type AdequacyLevel = 'short' | 'minimum' | 'preferred';

export interface AdequacyVerdict {
  events: number;
  nonEvents: number;
  meetsMinimum: boolean;
  meetsPreferred: boolean;
  level: AdequacyLevel;
  /** How many more events and non-events each threshold still needs (0 when met). */
  missingForMinimum: { events: number; nonEvents: number };
  missingForPreferred: { events: number; nonEvents: number };
  /** One plain sentence for the page. */
  message: string;
}

const missing = (have: number, want: number) => Math.max(0, want - have);

/** The verdict on a count of events and non-events: both must reach a threshold for it to be met. */
export function adequacyVerdict(events: number, nonEvents: number): AdequacyVerdict {
  if (!Number.isInteger(events) || !Number.isInteger(nonEvents) || events < 0 || nonEvents < 0)
    throw new RangeError('events and non-events must be whole numbers, 0 or more');
  const meetsMinimum = events >= MINIMUM_EACH && nonEvents >= MINIMUM_EACH;
  const meetsPreferred = events >= PREFERRED_EACH && nonEvents >= PREFERRED_EACH;
  const level: AdequacyLevel = meetsPreferred ? 'preferred' : meetsMinimum ? 'minimum' : 'short';
  const lacking = (m: { events: number; nonEvents: number }) =>
    [
      m.events ? `${formatCount(m.events)} more event${m.events === 1 ? '' : 's'}` : '',
      m.nonEvents ? `${formatCount(m.nonEvents)} more non-event${m.nonEvents === 1 ? '' : 's'}` : '',
    ]
      .filter(Boolean)
      .join(' and ');
  const missingForMinimum = { events: missing(events, MINIMUM_EACH), nonEvents: missing(nonEvents, MINIMUM_EACH) };
  const missingForPreferred = {
    events: missing(events, PREFERRED_EACH),
    nonEvents: missing(nonEvents, PREFERRED_EACH),
  };
  const message =
    level === 'preferred'
      ? `Meets the preferred size of ${PREFERRED_EACH} events and ${PREFERRED_EACH} non-events.`
      : level === 'minimum'
        ? `Meets the minimum of ${MINIMUM_EACH} events and ${MINIMUM_EACH} non-events, but not the preferred ${PREFERRED_EACH} of each (${lacking(missingForPreferred)} needed).`
        : `Below the minimum of ${MINIMUM_EACH} events and ${MINIMUM_EACH} non-events (${lacking(missingForMinimum)} needed): estimates from this cohort are imprecise and may mislead.`;
  return { events, nonEvents, meetsMinimum, meetsPreferred, level, missingForMinimum, missingForPreferred, message };
}

/** Where the AUC behind the precision figures came from. */
export type AdequacyAucSource =
  | 'this run' // the run's own AUC
  | 'run on this cohort version' // the latest completed run that used this cohort version
  | 'approved run of the score' // the run on which a version of the cohort's score was approved for clinical use
  | 'latest run of the score' // the score's latest completed run on any cohort
  | 'assumed'; // no run to take it from: ASSUMED_AUC

/** The AUC used when no run gives one; the panel says so in words. Common practice for a useful score, no source. */
export const ASSUMED_AUC = 0.75;

export interface AdequacyPrecision {
  /** Expected full width of the 95% CI of O/E, around O/E = 1. */
  oe: number | null;
  /** Expected full width of the 95% CI of the AUC. */
  auc: number | null;
  /** Expected full width of the 95% CI of the calibration slope; null when the AUC is not above 0.5. */
  slope: number | null;
  /** Why a width is missing, if one is. */
  note: string | null;
}

/** The block the run and cohort-version responses carry as `adequacy`. */
export interface CohortAdequacy {
  n: number;
  events: number;
  nonEvents: number;
  eventRate: number | null;
  verdict: AdequacyVerdict;
  auc: { value: number | null; source: AdequacyAucSource; runId: string | null };
  precision: AdequacyPrecision;
  /** What the precision figures assume, in a sentence. */
  assumption: string;
}

export const PRECISION_ASSUMPTION =
  'Expected widths by the formulas of Riley et al. (2021), assuming the score is well calibrated in these patients and its linear predictor is Normal with this event rate and AUC; the widths a run reports can differ.';
