// PrimeVue ships these two modules without type declarations; they are plain event buses.
declare module 'primevue/toasteventbus' {
  const bus: import('@primeuix/utils/eventbus').EventBusOptions;
  export default bus;
}
declare module 'primevue/confirmationeventbus' {
  const bus: import('@primeuix/utils/eventbus').EventBusOptions;
  export default bus;
}
