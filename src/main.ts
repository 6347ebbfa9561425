import { createApp } from 'vue';
import { createPinia } from 'pinia';
import PrimeVue from 'primevue/config';
import ToastService from 'primevue/toastservice';
import ConfirmationService from 'primevue/confirmationservice';

// PrimeVue's theme, made at build from our preset (src/theme/theme-css.ts), before any other style.
import 'virtual:primevue-theme/base.css';
import './assets/fonts.css';
import 'virtual:used-icons.css';
import './assets/base.css';

import App from './App.vue';
import { router } from './router';

const app = createApp(App);

// Pinia first: the router's guard reads the session store.
app.use(createPinia());
app.use(router);
// The components keep their styled-mode classes; their CSS is already in the page's style sheets.
app.use(PrimeVue, { theme: 'none' });
app.use(ToastService);
app.use(ConfirmationService);

app.mount('#app');
