// Imported first by main.ts, before any schema runs. Zod compiles object schemas with `new Function` when it can, and
// finds out by trying it once; under our content-security policy (script-src 'self', no 'unsafe-eval') that try is
// refused, and the refusal is reported as a CSP violation even though zod catches it. The browser never needs the
// compiled fast path for our small forms and answers, so the client tells zod not to try (same results, no eval).
import { config } from 'zod';

config({ jitless: true });
