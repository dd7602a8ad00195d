// Migrations are imported explicitly (globs of .ts files fail inside vitest). Append new ones in order.
import { Foundation1764633600000 } from './1764633600000-Foundation';
import { Registry1764633700000 } from './1764633700000-Registry';
import { Uploads1764633750000 } from './1764633750000-Uploads';
import { FastRows1764633760500 } from './1764633760500-FastRows';
import { Runs1764633800000 } from './1764633800000-Runs';
import { Governance1764633850000 } from './1764633850000-Governance';
import { Drift1764633900000 } from './1764633900000-Drift';
import { StagedRows1764633950000 } from './1764633950000-StagedRows';
import { RowBlocks1764634000000 } from './1764634000000-RowBlocks';
import { PackedBlocks1764700000000 } from './1764700000000-PackedBlocks';
import { UploadPlainText1764700100000 } from './1764700100000-UploadPlainText';
import { BlockInsertGuard1764700200000 } from './1764700200000-BlockInsertGuard';
import { DriftSeries1764700300000 } from './1764700300000-DriftSeries';
import { ForgetUploadText1764700316000 } from './1764700316000-ForgetUploadText';
import { AuditCheckpoints1764800000000 } from './1764800000000-AuditCheckpoints';
import { JobQueue1764900000000 } from './1764900000000-JobQueue';
import { DriftRunChoices1764900100000 } from './1764900100000-DriftRunChoices';
import { CohortMissingness1765000000000 } from './1765000000000-CohortMissingness';
import { ScoreComparisons1765000019000 } from './1765000019000-ScoreComparisons';
import { ComparisonJobs1765000027000 } from './1765000027000-ComparisonJobs';

export const migrations = [
  Foundation1764633600000,
  Registry1764633700000,
  Uploads1764633750000,
  FastRows1764633760500,
  Runs1764633800000,
  Governance1764633850000,
  Drift1764633900000,
  StagedRows1764633950000,
  RowBlocks1764634000000,
  PackedBlocks1764700000000,
  UploadPlainText1764700100000,
  BlockInsertGuard1764700200000,
  DriftSeries1764700300000,
  ForgetUploadText1764700316000,
  AuditCheckpoints1764800000000,
  JobQueue1764900000000,
  DriftRunChoices1764900100000,
  CohortMissingness1765000000000,
  ScoreComparisons1765000019000,
  ComparisonJobs1765000027000,
];
