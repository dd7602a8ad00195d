// The command line as a person runs it (a child process), and the keys its JSON documents (README, "Command line").
import { spawnSync } from 'node:child_process';

/** Runs `plumbline` with these arguments; stdout, stderr and the exit status come back as they are. */
export const runCli = (args: string[]) =>
  spawnSync('npx', ['tsx', 'server/src/cli/main.ts', ...args], { encoding: 'utf8' });

/** The top-level keys of `plumbline validate`'s JSON, in order. */
export const CLI_JSON_KEYS = [
  'n',
  'events',
  'auc',
  'logLoss',
  'logLossTotal',
  'brier',
  'scaledBrier',
  'calibrationIntercept',
  'calibrationSlope',
  'oe',
  'hosmerLemeshow',
  'spiegelhalter',
  'ici',
  'e50',
  'e90',
  'emax',
  'netBenefit',
  'thresholds',
  'warnings',
];
