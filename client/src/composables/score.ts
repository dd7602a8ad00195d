// One score with its version history, loaded for the page that shows or extends it.
import { ref, type Ref } from 'vue';
import type { ScoreDto, ScoreVersionDto } from '@shared/scores';
import { errorMessage } from '@/api/http';
import * as scoresApi from '@/api/scores';

export function useScore(scoreId: Ref<string>) {
  const score = ref<ScoreDto | null>(null);
  const versions = ref<ScoreVersionDto[]>([]);
  const loading = ref(false);
  const loadError = ref<string | null>(null);
  async function load() {
    loading.value = true;
    loadError.value = null;
    try {
      const res = await scoresApi.getScore(scoreId.value);
      score.value = res.score;
      versions.value = res.versions;
    } catch (err) {
      loadError.value = errorMessage(err);
    } finally {
      loading.value = false;
    }
  }
  return { score, versions, loading, loadError, load };
}
