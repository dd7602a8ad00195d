// Stored cohorts and their immutable versions: lists, details, rows with server-side paging, saved mappings.
import type { ColumnMappingSpec } from '@shared/cohorts';
import { rowPeriodLabel, type PeriodKind } from '@shared/periods';
import { ILike, IsNull } from 'typeorm';
import { dataSource } from '../../platform/database/dataSource';
import { Cohort } from '../../platform/database/entities/Cohort';
import { ColumnMapping } from '../../platform/database/entities/ColumnMapping';
import type { AuthUser } from '../accounts/actor';
import { invalid, notFound } from '../errors';
import { cohortVersionAdequacy } from '../runs/adequacy';
import { appendAudit } from '../accounts/audit';
import { browseRows } from '../../jobs/threads/pool';

const SORTS: Record<string, string> = {
  name: 'c.name',
  createdAt: 'c.created_at',
  versions: 'versions',
  latestRows: 'latest_rows',
};

export async function listCohorts(q: {
  page: number;
  pageSize: number;
  search?: string;
  sortBy: string;
  sortDir: 'asc' | 'desc';
}) {
  const where = q.search ? `WHERE c.name ILIKE $3 OR c.description ILIKE $3` : '';
  const params: unknown[] = [q.pageSize, (q.page - 1) * q.pageSize];
  if (q.search) params.push(`%${q.search.replace(/[%_\\]/g, (m) => `\\${m}`)}%`);
  const rows = await dataSource.query(
    `SELECT c.id, c.name, c.description, c.score_id AS "scoreId", c.created_at AS "createdAt",
       (SELECT count(*)::int FROM cohort_versions v WHERE v.cohort_id = c.id) AS versions,
       lv.version AS "latestVersion", lv.label AS "latestLabel", lv.row_count AS latest_rows, lv.events AS "latestEvents", lv.created_at AS "latestAt"
     FROM cohorts c
     LEFT JOIN LATERAL (SELECT version, label, row_count, events, created_at FROM cohort_versions v WHERE v.cohort_id = c.id ORDER BY version DESC LIMIT 1) lv ON true
     ${where}
     ORDER BY ${SORTS[q.sortBy]} ${q.sortDir === 'asc' ? 'ASC' : 'DESC'} NULLS LAST, c.id
     LIMIT $1 OFFSET $2`,
    params,
  );
  const n = await dataSource.getRepository(Cohort).count({
    where: q.search ? [{ name: ILike(params[2] as string) }, { description: ILike(params[2] as string) }] : {},
  });
  return {
    cohorts: rows.map(({ latest_rows, ...r }: Record<string, unknown>) => ({ ...r, latestRows: latest_rows })),
    total: n as number,
    page: q.page,
    pageSize: q.pageSize,
  };
}

const VERSION_COLUMNS = `v.id, v.cohort_id AS "cohortId", v.version, v.label, to_char(v.period_start, 'YYYY-MM-DD') AS "periodStart",
  to_char(v.period_end, 'YYYY-MM-DD') AS "periodEnd", v.source_filename AS "sourceFilename", v.source_sha256 AS "sourceSha256",
  v.source_bytes::float8 AS "sourceBytes", v.row_count AS "rowCount", v.events, v.excluded_count AS "excludedCount", v.exclusions,
  v.mapping, v.uploaded_by AS "uploadedBy", u.name AS "uploadedByName", v.created_at AS "createdAt"`;

export async function getCohort(id: string) {
  const rows = await dataSource.getRepository(Cohort).find({
    select: { id: true, name: true, description: true, scoreId: true, createdAt: true },
    where: { id },
  });
  if (!rows.length) throw notFound('cohort');
  const versions = await dataSource.query(
    `SELECT ${VERSION_COLUMNS} FROM cohort_versions v LEFT JOIN users u ON u.id = v.uploaded_by WHERE v.cohort_id = $1 ORDER BY v.version DESC`,
    [id],
  );
  return { cohort: rows[0], versions };
}

/** One version as the API returns it, with `adequacy`: is it big enough, and how precise would a run on it be? */
export async function getCohortVersion(cohortId: string, version: number) {
  const v = await readCohortVersion(cohortId, version);
  return { ...v, adequacy: await cohortVersionAdequacy(v) };
}

async function readCohortVersion(cohortId: string, version: number) {
  const rows = await dataSource.query(
    `SELECT ${VERSION_COLUMNS}, v.column_summary AS "columnSummary", v.missingness FROM cohort_versions v LEFT JOIN users u ON u.id = v.uploaded_by
     WHERE v.cohort_id = $1 AND v.version = $2`,
    [cohortId, version],
  );
  if (!rows.length) throw notFound('cohort version');
  return rows[0];
}

/** Rows of one version, paged and sorted; sort keys are line_no, outcome, event_date, or a predictor/subgroup key. */
export async function listCohortRows(
  cohortId: string,
  version: number,
  q: { page: number; pageSize: number; search?: string; sortBy: string; sortDir: 'asc' | 'desc' },
) {
  const v = await readCohortVersion(cohortId, version);
  const mapping = v.mapping as ColumnMappingSpec;
  const predictorKeys = Object.keys(mapping.predictors ?? {});
  const subgroupKeys = Object.keys(mapping.subgroups ?? {});
  if (!['line_no', 'outcome', 'event_date', ...predictorKeys, ...subgroupKeys].includes(q.sortBy)) {
    throw invalid(`cannot sort by "${q.sortBy}"; use line_no, outcome, event_date, a predictor or a subgroup`);
  }
  // Loading, sorting and searching happen in the row browser's thread, once per version and order; here only a page.
  // Rows store a period's first day; they show the label the file had (2026-Q2): by the version's one kind of period,
  // or, for a file that mixed kinds, by the label kept for each start date.
  const stored = v.mapping as { periodKind?: PeriodKind | null; periodLabels?: Record<string, string> | null };
  const periodKind = stored.periodKind ?? null;
  const periodLabels = stored.periodLabels ?? null;
  const browsed = await browseRows({
    cohortVersionId: v.id,
    rowCount: Number(v.rowCount),
    sortBy: q.sortBy,
    sortDir: q.sortDir,
    search: q.search,
    periodKind,
    periodLabels,
    page: q.page,
    pageSize: q.pageSize,
  });
  const rows = browsed.rows.map((r) => ({ ...r, period: rowPeriodLabel(r.eventDate, periodKind, periodLabels) }));
  return { rows, total: browsed.total, page: q.page, pageSize: q.pageSize, predictorKeys, subgroupKeys };
}

export async function listMappings(cohortId?: string) {
  return dataSource.getRepository(ColumnMapping).find({
    select: { id: true, name: true, cohortId: true, mapping: true, createdAt: true },
    where: cohortId ? [{ cohortId }, { cohortId: IsNull() }] : {},
    order: { createdAt: 'DESC' },
    take: 200,
  });
}

export async function saveMapping(
  actor: AuthUser,
  body: { name: string; cohortId?: string | null; mapping: ColumnMappingSpec },
  ip: string,
) {
  if (body.cohortId) {
    const found = await dataSource.getRepository(Cohort).find({ select: { id: true }, where: { id: body.cohortId } });
    if (!found.length) throw notFound('cohort');
  }
  return dataSource.transaction(async (m) => {
    const { id, name, cohortId, mapping, createdAt } = await m
      .getRepository(ColumnMapping)
      .save({ name: body.name, cohortId: body.cohortId ?? null, mapping: body.mapping, createdBy: actor.id });
    const row = { id, name, cohortId, mapping, createdAt };
    await appendAudit(
      {
        actorId: actor.id,
        actorEmail: actor.email,
        action: 'cohort.mapping.saved',
        targetType: 'column_mapping',
        targetId: row.id,
        sourceIp: ip,
        details: { name: body.name },
      },
      m,
    );
    return row;
  });
}
