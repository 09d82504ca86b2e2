/** The parts of an OpenAPI 3.1 document the reference page reads. */
export type JsonSchema = {
  type?: string | string[];
  properties?: Record<string, JsonSchema>;
  required?: string[];
  items?: JsonSchema;
  enum?: unknown[];
  const?: unknown;
  anyOf?: JsonSchema[];
  oneOf?: JsonSchema[];
  allOf?: JsonSchema[];
  format?: string;
  pattern?: string;
  minimum?: number;
  maximum?: number;
  exclusiveMinimum?: number;
  exclusiveMaximum?: number;
  minLength?: number;
  maxLength?: number;
  minItems?: number;
  maxItems?: number;
  default?: unknown;
  description?: string;
  $ref?: string;
  additionalProperties?: boolean | JsonSchema;
};

export type Parameter = { name: string; in: 'path' | 'query' | 'header'; required?: boolean; schema?: JsonSchema; description?: string };

export type Operation = {
  tags?: string[];
  summary?: string;
  description?: string;
  operationId?: string;
  parameters?: Parameter[];
  requestBody?: { content: Record<string, { schema?: JsonSchema }> };
  responses?: Record<string, { description?: string; content?: Record<string, unknown> }>;
  security?: unknown[];
};

export type OpenApiDoc = { info: { title: string; version: string; description?: string }; paths: Record<string, Record<string, Operation>> };

export const METHODS = ['get', 'post', 'put', 'patch', 'delete'] as const;

export type OperationEntry = { method: string; path: string; op: Operation; tag: string };

/** Every operation, grouped by its first tag, in the document's order. */
export function groupByTag(doc: OpenApiDoc): { tag: string; ops: OperationEntry[] }[] {
  const groups = new Map<string, OperationEntry[]>();
  for (const [path, item] of Object.entries(doc.paths)) {
    for (const method of METHODS) {
      const op = item[method];
      if (!op) continue;
      const tag = op.tags?.[0] ?? 'other';
      if (!groups.has(tag)) groups.set(tag, []);
      groups.get(tag)!.push({ method, path, op, tag });
    }
  }
  return [...groups].map(([tag, ops]) => ({ tag, ops }));
}

const typeOf = (s: JsonSchema): string => {
  if (s.$ref) return s.$ref.split('/').pop() ?? 'object';
  if (s.const !== undefined) return JSON.stringify(s.const);
  if (s.enum) return s.enum.map((v) => JSON.stringify(v)).join(' | ');
  const alts = s.anyOf ?? s.oneOf;
  if (alts) return alts.map(typeOf).join(' or ');
  if (s.allOf) return s.allOf.map(typeOf).join(' and ');
  const t = Array.isArray(s.type) ? s.type.join(' or ') : (s.type ?? 'any');
  if (t === 'array') return `${s.items ? typeOf(s.items) : 'any'}[]`;
  if (s.format) return `${t} (${s.format})`;
  return t;
};
export { typeOf as typeText };

/** Limits and defaults in words: "10–200 characters", "≥ 1", "default 500". */
export function limitsText(s: JsonSchema): string[] {
  const out: string[] = [];
  const range = (lo: number | undefined, hi: number | undefined, unit: string) => {
    if (lo !== undefined && hi !== undefined) out.push(`${lo}–${hi}${unit}`);
    else if (lo !== undefined) out.push(`at least ${lo}${unit}`);
    else if (hi !== undefined) out.push(`at most ${hi}${unit}`);
  };
  range(s.minLength, s.maxLength, ' characters');
  range(s.minItems, s.maxItems, ' items');
  range(s.minimum, s.maximum, '');
  if (s.exclusiveMinimum !== undefined) out.push(`more than ${s.exclusiveMinimum}`);
  if (s.exclusiveMaximum !== undefined) out.push(`less than ${s.exclusiveMaximum}`);
  if (s.pattern) out.push(`pattern ${s.pattern}`);
  if (s.default !== undefined) out.push(`default ${JSON.stringify(s.default)}`);
  return out;
}

/** The object a field list can show: the schema itself, an array's items, or the object among anyOf. */
export function objectPart(s: JsonSchema | undefined): JsonSchema | null {
  if (!s) return null;
  if (s.properties) return s;
  if (s.items?.properties) return s.items;
  const alt = (s.anyOf ?? s.oneOf ?? s.allOf)?.find((x) => x.properties);
  return alt ?? null;
}
