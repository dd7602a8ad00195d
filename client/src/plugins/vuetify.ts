// Plumbline's one theme file: colours, typography and component defaults for the whole client.
import '@fontsource/roboto/latin-300.css';
import '@fontsource/roboto/latin-400.css';
import '@fontsource/roboto/latin-500.css';
import '@fontsource/roboto/latin-700.css';
import '@mdi/font/css/materialdesignicons.css';
import 'vuetify/styles';
import { createVuetify, type ThemeDefinition } from 'vuetify';

// A slate-and-teal palette: the line is deep teal, the bob is brass. Every pair below is
// WCAG AA (4.5:1 or better) against its on-colour.
const plumblineLight: ThemeDefinition = {
  dark: false,
  colors: {
    background: '#f3f5f5',
    surface: '#ffffff',
    'surface-variant': '#dde4e5',
    'on-surface-variant': '#2b3a3f',
    primary: '#16414f', // deep teal slate
    'on-primary': '#ffffff',
    secondary: '#4f6168', // slate
    'on-secondary': '#ffffff',
    accent: '#8a5a1c', // brass, used sparingly
    'on-accent': '#ffffff',
    success: '#2c6b45',
    'on-success': '#ffffff',
    warning: '#7f5200',
    'on-warning': '#ffffff',
    error: '#a3322b',
    'on-error': '#ffffff',
    info: '#275f80',
    'on-info': '#ffffff',
    caution: '#fbf3e4', // clinical-use caution background
    'on-caution': '#4a3108',
  },
  variables: {
    'font-body': '"Roboto", system-ui, "Segoe UI", sans-serif',
    'font-heading': '"Roboto", system-ui, "Segoe UI", sans-serif',
    'border-color': '#16414f',
    'border-opacity': 0.16,
    'medium-emphasis-opacity': 0.72,
  },
};

export const vuetify = createVuetify({
  theme: {
    defaultTheme: 'plumblineLight',
    themes: { plumblineLight },
  },
  defaults: {
    VBtn: { style: 'text-transform: none; letter-spacing: 0;' },
    VTextField: { variant: 'outlined', density: 'comfortable' },
    VSelect: { variant: 'outlined', density: 'comfortable' },
    VCard: { rounded: 'lg', border: true, elevation: 0 },
    VDataTable: { density: 'comfortable' },
    VDataTableServer: { density: 'comfortable' },
    VAlert: { variant: 'tonal' },
  },
});
