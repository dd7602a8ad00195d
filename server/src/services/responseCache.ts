// Serialized JSON answers of the busiest reads (a completed run's page, the score cards, the cohort list), and the
// counter that tells when they may no longer be shown.
//
// Why a kept answer is never stale: everything these answers show changes only through a state-changing API request
// (POST/PATCH/PUT/DELETE: sign-off, revoke, review, score or user edits, storing an upload…) — completed runs,
// stored cohort versions and signatures are immutable in the database, and no background job of this server touches
// the tables these answers read (the run queue changes only runs that are not completed; drift alerts, mail and
// upload clean-up write other tables). middleware/writeGeneration.ts bumps `writeGeneration` for every such request
// just before its answer leaves (after its transaction committed), and again when it closes. An answer is kept with
// the generation read BEFORE it was built and is served only while the generation is unchanged, so an answer built
// from data a write was changing is born out of date; a reader that saw a write's answer always gets a fresh build.
//
// One server process: the counter lives in this process's memory. A second API process writing to the same database
// would not bump it, so these caches assume one API process per database; running several needs a cross-process
// signal first (e.g. PostgreSQL NOTIFY in the same transactions).
import { createHash } from 'node:crypto';
import type { Request, Response } from 'express';

let writeGeneration = 0;

/** A state-changing request is answering (or ended): every kept answer and kept account row is out of date. */
export function noteWrite(): void {
  writeGeneration++;
}

export function currentWriteGeneration(): number {
  return writeGeneration;
}

export interface JsonBody {
  body: Buffer;
  /** A weak validator over the bytes (the same form Express gives res.json answers). */
  etag: string;
}

export function toJsonBody(value: unknown): JsonBody {
  const body = Buffer.from(JSON.stringify(value), 'utf8');
  const etag = `W/"${body.length.toString(16)}-${createHash('sha1').update(body).digest('base64').slice(0, 27)}"`;
  return { body, etag };
}

/**
 * Answers kept per key for the current write generation. `build` returns what to send and whether it may be kept
 * (e.g. a run that is not completed yet is sent but not kept). Concurrent misses of one key share one build.
 */
export class ResponseCache {
  private readonly kept = new Map<string, { generation: number; body: JsonBody }>();
  private readonly building = new Map<string, { generation: number; promise: Promise<JsonBody> }>();

  constructor(private readonly limit: number) {}

  async get(key: string, build: () => Promise<{ value: unknown; keep: boolean }>): Promise<JsonBody> {
    const generation = writeGeneration;
    const hit = this.kept.get(key);
    if (hit && hit.generation === generation) return hit.body;
    const pending = this.building.get(key);
    if (pending && pending.generation === generation) return pending.promise;
    const promise = build().then(({ value, keep }) => {
      const body = toJsonBody(value);
      // Kept only if no write answered while it was being built (else the next reader builds again).
      if (keep && writeGeneration === generation) {
        this.kept.delete(key);
        this.kept.set(key, { generation, body });
        if (this.kept.size > this.limit) this.kept.delete(this.kept.keys().next().value as string);
      }
      return body;
    });
    this.building.set(key, { generation, promise });
    const done = () => {
      if (this.building.get(key)?.promise === promise) this.building.delete(key);
    };
    promise.then(done, done);
    return promise;
  }

  /** The kept answer for the current write generation, without building one. */
  peek(key: string): JsonBody | undefined {
    const hit = this.kept.get(key);
    return hit && hit.generation === writeGeneration ? hit.body : undefined;
  }

  /** For tests: how many answers are kept. */
  get size(): number {
    return this.kept.size;
  }

  clear(): void {
    this.kept.clear();
    this.building.clear();
  }
}

/** Sends a kept JSON answer as res.json would (type, length, ETag; 304 for a matching If-None-Match). */
export function sendJsonBody(req: Request, res: Response, json: JsonBody): void {
  res.setHeader('Content-Type', 'application/json; charset=utf-8');
  res.setHeader('ETag', json.etag);
  if (req.fresh) {
    res.removeHeader('Content-Type');
    res.status(304).end();
    return;
  }
  res.setHeader('Content-Length', json.body.length);
  res.end(req.method === 'HEAD' ? undefined : json.body);
}
