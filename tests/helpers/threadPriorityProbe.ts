// Worker-thread probe for tests/unit/workers/threadPriority.test.ts: reads this thread's nice value from Linux's
// /proc/thread-self/stat, lowers the priority the way the run and bootstrap workers do, and reads it again.
import { parentPort } from 'node:worker_threads';
import { lowerThisThreadPriority } from '../../server/src/workers/threadPriority';
import { threadNice } from './threadNice';

const before = threadNice();
const lowered = lowerThisThreadPriority();
parentPort!.postMessage({ before, lowered, after: threadNice() });
