// Review, sign-off, revocation, comments, the chair's queue, the run report and the dev outbox.
import type {
  CommentView,
  Decision,
  OutboxRow,
  ReceivedMail,
  ReviewView,
  RunGovernanceView,
  RunReport,
  SignatureView,
  SignoffQueueItem,
  Verdict,
} from '@shared/governance';
import { http } from './http';

export const getRunGovernance = (runId: string) => http.get<RunGovernanceView>(`/api/runs/${runId}/review`);

export const reviewRun = (runId: string, body: { verdict: Verdict; reasoning: string; comparisonId?: string }) =>
  http.post<ReviewView>(`/api/runs/${runId}/review`, body);

export const signoffRun = (runId: string, body: { decision: Decision; password: string; reason?: string }) =>
  http.post<SignatureView>(`/api/runs/${runId}/signoff`, body);

export const revokeApproval = (scoreVersionId: string, body: { password: string; reason: string }) =>
  http.post<SignatureView>(`/api/score-versions/${scoreVersionId}/revoke`, body);

export const listComments = (runId: string) => http.get<CommentView[]>(`/api/runs/${runId}/comments`);

export const addComment = (runId: string, body: string) =>
  http.post<CommentView>(`/api/runs/${runId}/comments`, { body });

export const getSignoffQueue = () => http.get<SignoffQueueItem[]>('/api/signoff-queue');

export const getRunReport = (runId: string) => http.get<RunReport>(`/api/runs/${runId}/report`);

export const getDevOutbox = () => http.get<{ received: ReceivedMail[]; outbox: OutboxRow[] }>('/api/dev/outbox');
