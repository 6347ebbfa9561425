// `npm run dev`: the server with Vite in middleware mode, restarted by tsx watch on server changes.
import { main } from './cli/main';

process.exitCode = await main([process.argv.includes('--dev') ? 'dev' : 'start']);
