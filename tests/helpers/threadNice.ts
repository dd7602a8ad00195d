import { readFileSync } from 'node:fs';

/** The calling thread's nice value (Linux: field 19 of /proc/thread-self/stat, see proc(5)). */
export function threadNice(): number {
  const stat = readFileSync('/proc/thread-self/stat', 'utf8');
  // Fields after the command name (which may hold spaces) start at field 3 ("state"), so field 19 is index 16.
  const rest = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  return Number(rest[16]);
}
