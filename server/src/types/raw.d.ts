// Lets TypeScript accept `import page from './doc.md?raw'` (vitest and the esbuild bundle both load it as text).
declare module '*?raw' {
  const text: string;
  export default text;
}
