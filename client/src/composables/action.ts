// One request a person started from a form or a button: busy while it runs, and what went wrong, in words, if it failed.
import { ref } from 'vue';
import { errorMessage } from '@/api/http';

export function useAction() {
  const busy = ref(false);
  const error = ref<string | null>(null);
  /** Runs the request once; true when it succeeded. */
  async function run(request: () => Promise<unknown>): Promise<boolean> {
    busy.value = true;
    error.value = null;
    try {
      await request();
      return true;
    } catch (err) {
      error.value = errorMessage(err);
      return false;
    } finally {
      busy.value = false;
    }
  }
  return { busy, error, run };
}
