// Migrations are imported explicitly (globs of .ts files fail inside vitest). Append new ones in order.
import { Foundation1764633600000 } from './1764633600000-Foundation';
import { Registry1764633700000 } from './1764633700000-Registry';

export const migrations = [Foundation1764633600000, Registry1764633700000];
