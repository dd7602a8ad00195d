// Every entity, listed once: the DataSource and the tests read this list.
import { AlertRule } from './AlertRule';
import { AuditEntry } from './AuditEntry';
import { Cohort } from './Cohort';
import { CohortUpload } from './CohortUpload';
import { CohortVersion } from './CohortVersion';
import { ColumnMapping } from './ColumnMapping';
import { DriftAlert } from './DriftAlert';
import { DriftRunChoice } from './DriftRunChoice';
import { EmailOutbox } from './EmailOutbox';
import { RunComment } from './RunComment';
import { RunReview } from './RunReview';
import { Score } from './Score';
import { ScoreComparison } from './ScoreComparison';
import { ScoreVersion } from './ScoreVersion';
import { Signature } from './Signature';
import { User } from './User';
import { ValidationRun } from './ValidationRun';

export {
  AuditEntry,
  Cohort,
  CohortUpload,
  CohortVersion,
  ColumnMapping,
  Score,
  ScoreVersion,
  User,
  ValidationRun,
  RunReview,
  Signature,
  RunComment,
  EmailOutbox,
  AlertRule,
  DriftAlert,
  ScoreComparison,
  DriftRunChoice,
};
export const entities = [
  User,
  AuditEntry,
  Score,
  ScoreVersion,
  Cohort,
  ColumnMapping,
  CohortVersion,
  CohortUpload,
  ValidationRun,
  RunReview,
  Signature,
  RunComment,
  EmailOutbox,
  AlertRule,
  DriftAlert,
  ScoreComparison,
  DriftRunChoice,
];
