// Set-up for the component tests (happy-dom): Vuetify's layout code asks for ResizeObserver, which happy-dom lacks.
globalThis.ResizeObserver ??= class {
  observe() {}
  unobserve() {}
  disconnect() {}
} as unknown as typeof ResizeObserver;
