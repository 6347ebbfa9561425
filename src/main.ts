import { createApp } from 'vue';
import { createPinia } from 'pinia';
import PrimeVue from 'primevue/config';
import ToastService from 'primevue/toastservice';
import ConfirmationService from 'primevue/confirmationservice';

import './assets/fonts.css';
import 'virtual:used-icons.css';
import './assets/base.css';

import App from './App.vue';
import { router } from './router';
import { plumblinePreset } from './theme/plumbline-preset';

const app = createApp(App);

// Pinia first: the router's guard reads the session store.
app.use(createPinia());
app.use(router);
app.use(PrimeVue, {
  theme: {
    preset: plumblinePreset,
    options: {
      // Dark mode is opt-in by class, never by the operating system: a wall screen or a shared
      // desk PC must not change look because of someone else's setting.
      darkModeSelector: '.plumbline-dark',
      cssLayer: { name: 'primevue', order: 'base, primevue' },
    },
  },
});
app.use(ToastService);
app.use(ConfirmationService);

app.mount('#app');
