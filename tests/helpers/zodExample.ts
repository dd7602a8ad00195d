// Builds a plausible valid value from a zod 4 schema (best effort), so fuzz mutations reach past the first check.
import { randomUUID } from 'node:crypto';

type Def = Record<string, unknown> & { type: string };
const defOf = (s: unknown): Def | undefined => (s as { _zod?: { def: Def } } | undefined)?._zod?.def;

export function exampleOf(schema: unknown, depth = 0): unknown {
  const def = defOf(schema);
  if (!def || depth > 8) return undefined;
  switch (def.type) {
    case 'optional':
    case 'nullable':
    case 'readonly':
    case 'catch':
    case 'nonoptional':
      return exampleOf(def.innerType, depth + 1);
    case 'default':
    case 'prefault':
      return exampleOf(def.innerType, depth + 1);
    case 'pipe':
      return defOf(def.in)?.type === 'transform' ? exampleOf(def.out, depth + 1) : exampleOf(def.in, depth + 1);
    case 'lazy':
      return exampleOf((def.getter as () => unknown)(), depth + 1);
    case 'object': {
      const out: Record<string, unknown> = {};
      for (const [k, v] of Object.entries(def.shape as Record<string, unknown>)) {
        const x = exampleOf(v, depth + 1);
        if (x !== undefined) out[k] = x;
      }
      return out;
    }
    case 'record':
      return {};
    case 'array': {
      const x = exampleOf(def.element, depth + 1);
      return x === undefined ? [] : [x];
    }
    case 'tuple':
      return (def.items as unknown[]).map((i) => exampleOf(i, depth + 1));
    case 'union':
    case 'discriminatedUnion':
      return exampleOf((def.options as unknown[])[0], depth + 1);
    case 'enum':
      return Object.values(def.entries as Record<string, unknown>)[0];
    case 'literal':
      return (def.values as unknown[])[0];
    case 'boolean':
      return true;
    case 'number':
    case 'int':
      return 1;
    case 'bigint':
      return 1;
    case 'date':
      return '2025-01-01';
    case 'string': {
      const format = (def.format as string | undefined) ?? '';
      if (format === 'email') return `fuzz-${Date.now()}@example.test`;
      if (format === 'uuid' || format === 'guid') return randomUUID();
      if (format === 'datetime') return '2025-01-01T00:00:00Z';
      if (format === 'url') return 'https://example.test/';
      const checks = (def.checks as { _zod?: { def: Record<string, unknown> } }[] | undefined) ?? [];
      for (const c of checks) {
        const cd = c._zod?.def;
        if (cd?.format === 'regex' && String(cd.pattern).includes('\\d{4}-\\d{2}-\\d{2}')) return '2025-01-01';
        if (cd?.format === 'regex' && String(cd.pattern).startsWith('/^10\\.')) return '10.1234/fuzz';
      }
      return 'fuzz text value';
    }
    default:
      return undefined;
  }
}
