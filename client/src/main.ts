// First: switches off zod's eval probe before any schema runs (see zodConfig.ts; our CSP refuses eval).
import './zodConfig';
import { createApp } from 'vue';
import { createPinia } from 'pinia';
import App from './App.vue';
import { vuetify } from './plugins/vuetify';
import { router } from './router';
import { installSessionHandling } from './stores/auth';

const app = createApp(App);
const pinia = createPinia();
app.use(pinia);
app.use(router);
app.use(vuetify);
installSessionHandling(router);
app.mount('#app');
