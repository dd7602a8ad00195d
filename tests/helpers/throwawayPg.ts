// A separate, short-lived PostgreSQL cluster for tests that stop or crash the database or the server.
// As root the cluster belongs to the postgres user (PostgreSQL refuses to run as root), as in docker-free-dev.sh.
import { execFileSync, spawnSync } from 'node:child_process';
import { chownSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import net from 'node:net';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { runTsx } from './childServer';
import { FIXTURE_MODEL } from './fixtures';
import type { ScoreModel } from '@shared/model';

const PG_BIN = process.env.PLUMBLINE_PG_BIN ?? '/usr/lib/postgresql/15/bin';
const isRoot = process.getuid?.() === 0;

function pgRun(bin: string, args: string[], opts: { allowFail?: boolean } = {}): string {
  const cmd = isRoot ? 'runuser' : path.join(PG_BIN, bin);
  const full = isRoot ? ['-u', 'postgres', '--', path.join(PG_BIN, bin), ...args] : args;
  const res = spawnSync(cmd, full, { encoding: 'utf8', timeout: 120_000 });
  if (res.status !== 0 && !opts.allowFail)
    throw new Error(`${bin} ${args.join(' ')} failed (${res.status}): ${res.stderr}${res.stdout}`);
  return `${res.stdout ?? ''}${res.stderr ?? ''}`;
}

/** A loopback port nothing listens on, from a range (a connect that is refused means free). */
export async function freePort(from: number, span: number): Promise<number> {
  for (let i = 0; i < 50; i++) {
    const port = from + Math.floor(Math.random() * span);
    const inUse = await new Promise<boolean>((resolve) => {
      const s = net.connect({ host: '127.0.0.1', port }, () => {
        s.destroy();
        resolve(true);
      });
      s.on('error', () => resolve(false));
    });
    if (!inUse) return port;
  }
  throw new Error(`no free port in ${from}..${from + span}`);
}

export interface ThrowawayCluster {
  port: number;
  dataDir: string;
  /** PG* variables for a child process (database defaults to plumbline). */
  env(database?: string): Record<string, string>;
  createDatabase(name: string): void;
  psql(sql: string, database?: string): string;
  start(): void;
  stop(mode?: 'fast' | 'immediate'): void;
  destroy(): void;
}

export async function createThrowawayCluster(): Promise<ThrowawayCluster> {
  const port = await freePort(54400, 400);
  const root = mkdtempSync(path.join(tmpdir(), 'plumbline-pg-'));
  const dataDir = path.join(root, 'data');
  const sockDir = path.join(root, 'sock');
  mkdirSync(dataDir, { mode: 0o700 });
  mkdirSync(sockDir);
  if (isRoot) {
    const uid = Number(execFileSync('id', ['-u', 'postgres']).toString().trim());
    const gid = Number(execFileSync('id', ['-g', 'postgres']).toString().trim());
    for (const d of [root, dataDir, sockDir]) chownSync(d, uid, gid);
  }
  pgRun('initdb', ['-D', dataDir, '-U', 'postgres', '--auth=trust', '--encoding=UTF8', '--locale=C.UTF-8']);
  const cluster: ThrowawayCluster = {
    port,
    dataDir,
    env: (database = 'plumbline') => ({
      PGHOST: '127.0.0.1',
      PGPORT: String(port),
      PGUSER: 'postgres',
      PGPASSWORD: '',
      PGDATABASE: database,
    }),
    createDatabase(name) {
      cluster.psql(`CREATE DATABASE ${name}`, 'postgres');
    },
    psql(sql, database = 'plumbline') {
      return execFileSync(
        path.join(PG_BIN, 'psql'),
        ['-h', '127.0.0.1', '-p', String(port), '-U', 'postgres', '-tAq', '-v', 'ON_ERROR_STOP=1', '-c', sql, database],
        {
          encoding: 'utf8',
        },
      ).trim();
    },
    start() {
      pgRun('pg_ctl', [
        '-D',
        dataDir,
        '-l',
        path.join(root, 'postgres.log'),
        '-w',
        '-t',
        '60',
        '-o',
        `-h 127.0.0.1 -p ${port} -k ${sockDir} -c fsync=off`,
        'start',
      ]);
    },
    stop(mode = 'fast') {
      pgRun('pg_ctl', ['-D', dataDir, '-m', mode, '-w', '-t', '60', 'stop'], { allowFail: true });
    },
    destroy() {
      cluster.stop('immediate');
      rmSync(root, { recursive: true, force: true });
    },
  };
  cluster.start();
  return cluster;
}

/** A started throwaway cluster whose `plumbline` database is migrated and holds the demo accounts. */
export async function createPreparedCluster(): Promise<ThrowawayCluster> {
  const cluster = await createThrowawayCluster();
  cluster.createDatabase('plumbline');
  runTsx('tests/helpers/bin/prepareDatabase.ts', cluster.env());
  return cluster;
}

/** Registers an invented score with one formula version (FIXTURE_MODEL) straight in the database; returns the version id. */
export function insertFixtureScore(cluster: ThrowawayCluster, name: string, model: ScoreModel = FIXTURE_MODEL): string {
  const scoreId =
    cluster.psql(`INSERT INTO scores (name, outcome_definition, time_horizon, intended_population, citation, caution_text)
    VALUES ('${name.replace(/'/g, "''")}', 'readmission (invented)', '30 days', 'adults (invented)', 'invented for tests', 'not medical advice') RETURNING id`);
  return cluster.psql(`INSERT INTO score_versions (score_id, version, mode, model)
    VALUES ('${scoreId}', 1, 'formula', '${JSON.stringify(model).replace(/'/g, "''")}'::jsonb) RETURNING id`);
}
