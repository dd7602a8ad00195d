// From the sources only (jobs/threads/pool.ts): registers tsx inside this worker thread, with the project's tsconfig so
// '@shared/…' paths resolve wherever the process was started, then loads the task module. On Node 20 a loader given
// to the thread as `--import tsx` does not reliably reach modules the thread imports; registering here does.
import { fileURLToPath } from 'node:url';
import { register } from 'tsx/esm/api';

register({ tsconfig: fileURLToPath(new URL('../../../../tsconfig.json', import.meta.url)) });
const tasks = await import('./tasks.ts');
export default tasks.default;
