export * from './wilson';
export * from './nfti';
export * from './iss';
export * from './cribari';
