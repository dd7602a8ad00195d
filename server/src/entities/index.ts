// Every entity, listed once: the DataSource and the tests read this list.
import { AuditEntry } from './AuditEntry';
import { Cohort } from './Cohort';
import { CohortVersion } from './CohortVersion';
import { ColumnMapping } from './ColumnMapping';
import { Score } from './Score';
import { ScoreVersion } from './ScoreVersion';
import { User } from './User';

export { AuditEntry, Cohort, CohortVersion, ColumnMapping, Score, ScoreVersion, User };
export const entities = [User, AuditEntry, Score, ScoreVersion, Cohort, ColumnMapping, CohortVersion];
