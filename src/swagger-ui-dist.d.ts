// swagger-ui-dist ships no types; the options used by src/pages/api-reference.astro.
declare module 'swagger-ui-dist/swagger-ui-es-bundle.js' {
  interface SwaggerUIOptions {
    domNode: HTMLElement;
    url?: string;
    deepLinking?: boolean;
    docExpansion?: 'list' | 'full' | 'none';
    defaultModelsExpandDepth?: number;
    validatorUrl?: string | null;
    tryItOutEnabled?: boolean;
    onComplete?: () => void;
  }
  const SwaggerUI: (options: SwaggerUIOptions) => unknown;
  export default SwaggerUI;
}
