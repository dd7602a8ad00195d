// The one join of a validation run with what it validated: the score version and its score, the cohort version and
// its cohort. Every read that names a run's score or cohort builds on these fragments (aliases r, sv, s, cv, c), so
// the join and the way a cohort version is named to people are written once.

/** `validation_runs r` joined to `score_versions sv`, `scores s`, `cohort_versions cv` and `cohorts c`. */
export const RUN_SCORE_COHORT_JOIN = `validation_runs r
  JOIN score_versions sv ON sv.id = r.score_version_id
  JOIN scores s ON s.id = sv.score_id
  JOIN cohort_versions cv ON cv.id = r.cohort_version_id
  JOIN cohorts c ON c.id = cv.cohort_id`;

/** A cohort version as people know it: its label, else "<cohort name> v<version>". */
export const COHORT_LABEL_SQL = `coalesce(nullif(cv.label, ''), c.name || ' v' || cv.version)`;

/** The cohort fields of a row read through such a join (cohort_id, cohort_name, cohort_version_id, cohort_version, cohort_label). */
export function cohortOfRow(r: Record<string, unknown>): {
  cohortId: string;
  cohortName: string;
  cohortVersionId: string;
  cohortVersion: number;
  cohortLabel: string;
} {
  return {
    cohortId: r.cohort_id as string,
    cohortName: r.cohort_name as string,
    cohortVersionId: r.cohort_version_id as string,
    cohortVersion: r.cohort_version as number,
    cohortLabel: (r.cohort_label as string) ?? '',
  };
}
