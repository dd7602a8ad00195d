// Score registry: descriptions, numbered versions, and the --model JSON export.
import type { ScoreModel } from '@shared/model';
import type {
  CreateScoreRequest,
  CreateScoreVersionRequest,
  ScoreDto,
  ScoreSummaryDto,
  ScoreVersionDto,
  UpdateScoreRequest,
} from '@shared/scores';
import { http } from './http';

const base = (id: string) => `/api/scores/${encodeURIComponent(id)}`;

export const listScores = async () => (await http.get<{ scores: ScoreSummaryDto[] }>('/api/scores')).scores;

export const getScore = (id: string) => http.get<{ score: ScoreDto; versions: ScoreVersionDto[] }>(base(id));

export const createScore = async (body: CreateScoreRequest) =>
  (await http.post<{ score: ScoreDto }>('/api/scores', body)).score;

export const updateScore = async (id: string, change: UpdateScoreRequest) =>
  (await http.patch<{ score: ScoreDto }>(base(id), change)).score;

export const listVersions = async (id: string) =>
  (await http.get<{ versions: ScoreVersionDto[] }>(`${base(id)}/versions`)).versions;

export const getVersion = async (id: string, version: number) =>
  (await http.get<{ version: ScoreVersionDto }>(`${base(id)}/versions/${version}`)).version;

/** Adds the next version; the body is a version or an imported --model file with a change note. */
export const createVersion = async (
  id: string,
  body: CreateScoreVersionRequest | (ScoreModel & { changeNote?: string }),
) => (await http.post<{ version: ScoreVersionDto }>(`${base(id)}/versions`, body)).version;

/** The formula of a version exactly as the server exports it (the --model JSON). */
export const exportModel = (id: string, version: number) =>
  http.get<ScoreModel>(`${base(id)}/versions/${version}/export`);
