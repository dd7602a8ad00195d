// The server-side tsconfig also checks tests/; it cannot read .vue files (vue-tsc checks those), so type them loosely here.
declare module '*.vue' {
  import type { DefineComponent } from 'vue';
  const component: DefineComponent<Record<string, unknown>, Record<string, unknown>, unknown>;
  export default component;
}
