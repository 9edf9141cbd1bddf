import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import ts from 'typescript';

/*
 * The import graph of TypeScript sources, read with the TypeScript compiler's own parser (no
 * regular expressions over source text): which modules a file imports, whether the import
 * survives compilation (an `import type` is erased, so it reaches nothing at run time), and
 * which process and timer globals the file uses.
 */

export interface ImportEdge {
  /** As written: './clock.js', 'node:fs', 'ajv'. */
  specifier: string;
  /** The .ts file a relative specifier names; null for a package or a built-in. */
  target: string | null;
  /** False for `import type`, `export type ... from` and imports of types only. */
  runtime: boolean;
  line: number;
}

export interface GlobalUse {
  name: string;
  line: number;
}

export interface ModuleFacts {
  file: string;
  imports: ImportEdge[];
  globals: GlobalUse[];
}

/** Globals that reach timers or the process. */
export const IMPURE_GLOBALS: ReadonlySet<string> = new Set([
  'setTimeout',
  'setInterval',
  'setImmediate',
  'clearTimeout',
  'clearInterval',
  'clearImmediate',
  'process',
]);

/** Every .ts file under `dir`, recursively, as absolute paths. */
export function tsFilesUnder(dir: string): string[] {
  const out: string[] = [];
  for (const entry of readdirSync(dir, { withFileTypes: true })) {
    const path = join(dir, entry.name);
    if (entry.isDirectory()) out.push(...tsFilesUnder(path));
    else if (entry.name.endsWith('.ts') && !entry.name.endsWith('.d.ts')) out.push(path);
  }
  return out.sort();
}

/** './x.js' from `from` -> the absolute path of x.ts (NodeNext specifiers name the output). */
function resolveRelative(from: string, specifier: string): string | null {
  if (!specifier.startsWith('.')) return null;
  const base = resolve(dirname(from), specifier);
  const candidates = [base.replace(/\.js$/, '.ts'), `${base}.ts`, join(base, 'index.ts')];
  return candidates.find((c) => existsSync(c)) ?? base.replace(/\.js$/, '.ts');
}

function importIsRuntime(node: ts.ImportDeclaration): boolean {
  const clause = node.importClause;
  if (!clause) return true; // import './side-effect.js'
  if (clause.isTypeOnly) return false;
  if (clause.name) return true;
  const bindings = clause.namedBindings;
  if (!bindings || ts.isNamespaceImport(bindings)) return true;
  // `import { type A, type B }` is erased whole (no verbatimModuleSyntax in this project).
  return bindings.elements.length === 0 || bindings.elements.some((e) => !e.isTypeOnly);
}

function exportIsRuntime(node: ts.ExportDeclaration): boolean {
  if (node.isTypeOnly) return false;
  const clause = node.exportClause;
  if (!clause || ts.isNamespaceExport(clause)) return true;
  return clause.elements.some((e) => !e.isTypeOnly);
}

/** An identifier that reads a global, not a property name, a key or a declaration's name. */
function readsGlobal(id: ts.Identifier): boolean {
  const p = id.parent;
  if (ts.isPropertyAccessExpression(p) && p.name === id) return false;
  if (ts.isQualifiedName(p) && p.right === id) return false;
  if (
    (ts.isPropertyAssignment(p) ||
      ts.isPropertyDeclaration(p) ||
      ts.isPropertySignature(p) ||
      ts.isMethodDeclaration(p) ||
      ts.isMethodSignature(p) ||
      ts.isVariableDeclaration(p) ||
      ts.isParameter(p) ||
      ts.isFunctionDeclaration(p) ||
      ts.isBindingElement(p) ||
      ts.isImportSpecifier(p) ||
      ts.isExportSpecifier(p)) &&
    p.name === id
  )
    return false;
  return !ts.isTypeReferenceNode(p);
}

/** The imports and impure globals of one file. */
export function readModule(file: string, text = readFileSync(file, 'utf8')): ModuleFacts {
  const source = ts.createSourceFile(file, text, ts.ScriptTarget.ES2022, true);
  const lineOf = (n: ts.Node): number =>
    source.getLineAndCharacterOfPosition(n.getStart(source)).line + 1;
  const imports: ImportEdge[] = [];
  const globals: GlobalUse[] = [];
  const add = (spec: ts.Expression, runtime: boolean, at: ts.Node): void => {
    if (!ts.isStringLiteralLike(spec)) return;
    imports.push({
      specifier: spec.text,
      target: resolveRelative(file, spec.text),
      runtime,
      line: lineOf(at),
    });
  };
  const visit = (node: ts.Node): void => {
    if (ts.isImportDeclaration(node)) add(node.moduleSpecifier, importIsRuntime(node), node);
    else if (ts.isExportDeclaration(node) && node.moduleSpecifier)
      add(node.moduleSpecifier, exportIsRuntime(node), node);
    else if (ts.isCallExpression(node) && node.expression.kind === ts.SyntaxKind.ImportKeyword) {
      const [arg] = node.arguments;
      if (arg) add(arg, true, node);
    } else if (ts.isImportTypeNode(node)) {
      const arg = node.argument;
      if (ts.isLiteralTypeNode(arg)) add(arg.literal as ts.Expression, false, node);
    } else if (ts.isIdentifier(node) && IMPURE_GLOBALS.has(node.text) && readsGlobal(node)) {
      globals.push({ name: node.text, line: lineOf(node) });
    }
    ts.forEachChild(node, visit);
  };
  visit(source);
  return { file, imports, globals };
}

/** Reads each file once. */
export class ModuleCache {
  private readonly facts = new Map<string, ModuleFacts>();

  get(file: string): ModuleFacts {
    let f = this.facts.get(file);
    if (!f) {
      f = existsSync(file) ? readModule(file) : { file, imports: [], globals: [] };
      this.facts.set(file, f);
    }
    return f;
  }
}

/**
 * Every module reachable from `entries` through runtime imports, each with the chain of files
 * that leads to it from its entry (for messages that show how an impure module was reached).
 */
export function reachable(
  entries: readonly string[],
  cache: ModuleCache,
): Map<string, readonly string[]> {
  const via = new Map<string, readonly string[]>();
  const queue: Array<[string, readonly string[]]> = entries.map((e) => [e, [e]]);
  for (let item = queue.shift(); item; item = queue.shift()) {
    const [file, chain] = item;
    if (via.has(file)) continue;
    via.set(file, chain);
    for (const edge of cache.get(file).imports) {
      if (edge.runtime && edge.target && !via.has(edge.target))
        queue.push([edge.target, [...chain, edge.target]]);
    }
  }
  return via;
}

/** The cycles of a directed graph: its strongly connected components with more than one node. */
export function cycles(graph: ReadonlyMap<string, ReadonlySet<string>>): string[][] {
  // Tarjan's algorithm; recursive, which is fine for a graph of a few hundred files.
  let index = 0;
  const indexOf = new Map<string, number>();
  const low = new Map<string, number>();
  const stack: string[] = [];
  const onStack = new Set<string>();
  const out: string[][] = [];
  const strong = (v: string): void => {
    indexOf.set(v, index);
    low.set(v, index);
    index++;
    stack.push(v);
    onStack.add(v);
    for (const w of graph.get(v) ?? []) {
      if (!indexOf.has(w)) {
        strong(w);
        low.set(v, Math.min(low.get(v)!, low.get(w)!));
      } else if (onStack.has(w)) low.set(v, Math.min(low.get(v)!, indexOf.get(w)!));
    }
    if (low.get(v) === indexOf.get(v)) {
      const component: string[] = [];
      for (let w = stack.pop(); w !== undefined; w = stack.pop()) {
        onStack.delete(w);
        component.push(w);
        if (w === v) break;
      }
      if (component.length > 1 || graph.get(v)?.has(v)) out.push(component.sort());
    }
  };
  for (const v of [...graph.keys()].sort()) if (!indexOf.has(v)) strong(v);
  return out;
}

/** `path` relative to `root`, with forward slashes, for messages. */
export function shortName(root: string, path: string): string {
  return relative(root, path).split('\\').join('/');
}

export interface FunctionSpan {
  name: string;
  line: number;
  lines: number;
}

/** Every function, method, arrow function and constructor of a file, with its length in lines. */
export function functionSpans(file: string, text = readFileSync(file, 'utf8')): FunctionSpan[] {
  const source = ts.createSourceFile(file, text, ts.ScriptTarget.ES2022, true);
  const lineOf = (pos: number): number => source.getLineAndCharacterOfPosition(pos).line + 1;
  const out: FunctionSpan[] = [];
  const nameOf = (n: ts.FunctionLikeDeclaration, outer: string): string => {
    if (ts.isConstructorDeclaration(n)) return `${outer}.constructor`;
    if (n.name) return n.name.getText(source);
    const p = n.parent;
    if ((ts.isVariableDeclaration(p) || ts.isPropertyAssignment(p)) && p.name)
      return p.name.getText(source);
    if (ts.isPropertyDeclaration(p)) return p.name.getText(source);
    return `${outer} (inner function)`;
  };
  const visit = (node: ts.Node, outer: string): void => {
    let name = outer;
    if (
      ts.isFunctionDeclaration(node) ||
      ts.isMethodDeclaration(node) ||
      ts.isArrowFunction(node) ||
      ts.isFunctionExpression(node) ||
      ts.isConstructorDeclaration(node) ||
      ts.isGetAccessorDeclaration(node) ||
      ts.isSetAccessorDeclaration(node)
    ) {
      name = nameOf(node, outer);
      const line = lineOf(node.getStart(source));
      out.push({ name, line, lines: lineOf(node.getEnd()) - line + 1 });
    } else if (ts.isClassDeclaration(node) && node.name) name = node.name.text;
    ts.forEachChild(node, (child) => visit(child, name));
  };
  visit(source, '');
  return out;
}
