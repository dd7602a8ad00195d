// Score cards of approved score versions (what clinicians read).
import type { ScoreCardView } from '@shared/governance';
import { http } from './http';

export const listScoreCards = () => http.get<ScoreCardView[]>('/api/scorecards');

export const getScoreCard = (versionId: string) => http.get<ScoreCardView>(`/api/scorecards/${versionId}`);
