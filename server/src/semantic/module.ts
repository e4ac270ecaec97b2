// Per-file semantic model: scopes, bindings (def-use), imports resolved to qualified names, classes and functions.
// Built in one pass over the preorder node array; name lookups are answered lazily and cached.
import { relativeModuleName } from './import-scan';
import type { SyntaxFile, SyntaxNode } from '../parse/syntax';

/** How a name got its value. */
export type BindingKind =
  | 'import'
  | 'assign'
  | 'augassign'
  | 'annotation'
  | 'param'
  | 'def'
  | 'class'
  | 'for'
  | 'with'
  | 'comprehension'
  | 'except'
  | 'walrus'
  | 'global';

/** One place where a name is bound. */
export interface Binding {
  name: string;
  kind: BindingKind;
  /** The target node (identifier, or the def/class name). */
  node: SyntaxNode;
  scope: Scope;
  /**
   * The expression the name is bound to, when it is known: the right-hand side of a simple assignment (or the
   * matching element of a tuple on both sides), a parameter's default, the `with` expression; the whole
   * augmented assignment for `+=`; the iterable for loop targets (with `iterated` set).
   */
  value: SyntaxNode | null;
  /** For `a, b = rhs` where rhs is not a literal tuple: the rhs and this target's position in it. */
  unpack?: { from: SyntaxNode; index: number };
  /** For loop and comprehension targets: the value is the iterable, not the element. */
  iterated?: boolean;
  /** For imports: the fully qualified name the local name stands for (e.g. `torch.nn.functional`). */
  qualifiedName?: string;
  /** For `def`/`class` bindings: the definition node. */
  definition?: SyntaxNode;
  /** For parameters: the function, and the parameter's position (0 = first, including `self`). */
  paramIndex?: number;
  /** For annotated parameters and variables: the annotation expression. */
  annotation?: SyntaxNode | null;
}

/** A Python scope: module, class body, function, lambda or comprehension. */
export class Scope {
  readonly bindings = new Map<string, Binding[]>();
  readonly globals = new Set<string>();
  readonly nonlocals = new Set<string>();
  readonly children: Scope[] = [];

  constructor(
    readonly kind: 'module' | 'class' | 'function' | 'lambda' | 'comprehension',
    readonly node: SyntaxNode,
    readonly parent: Scope | null,
  ) {
    parent?.children.push(this);
  }

  /** Records a binding in this scope (or in the module/enclosing scope for `global`/`nonlocal` names). */
  add(binding: Binding): void {
    const list = this.bindings.get(binding.name);
    if (list) list.push(binding);
    else this.bindings.set(binding.name, [binding]);
  }
}

/** A function or method definition. */
export interface FunctionInfo {
  name: string;
  /** Module-qualified name (`pkg.models.train_step`, `pkg.models.Net.forward`). */
  qualifiedName: string;
  node: SyntaxNode;
  scope: Scope;
  /** The class it is defined in, for methods. */
  owner: ClassInfo | null;
  /** Parameter bindings in order (including `self`). */
  params: Binding[];
  /** Expressions of its `return` statements (not those of nested functions). */
  returns: SyntaxNode[];
  decorators: SyntaxNode[];
}

/** A class definition with its bases (as written), methods and attributes. */
export interface ClassInfo {
  name: string;
  qualifiedName: string;
  node: SyntaxNode;
  scope: Scope;
  module: ModuleAnalysis;
  /** Base class expressions (keyword arguments such as `metaclass=` excluded). */
  bases: SyntaxNode[];
  methods: Map<string, FunctionInfo>;
  /**
   * Attribute bindings: `self.x = …` in any method, and class-body assignments. Each entry keeps the assigned
   * value expression (or null when unknown) and the target node.
   */
  attributes: Map<string, AttributeBinding[]>;
}

/** `self.name = value` (or a class-level assignment) in a class. */
export interface AttributeBinding {
  name: string;
  target: SyntaxNode;
  value: SyntaxNode | null;
  /** The method it is assigned in (null for class-body assignments). */
  method: FunctionInfo | null;
}

const CONDITIONAL_TYPES = new Set(['if_statement', 'elif_clause', 'else_clause', 'for_statement', 'while_statement', 'try_statement', 'except_clause', 'finally_clause', 'match_statement', 'case_clause', 'conditional_expression', 'boolean_operator']);
const LOOP_TYPES = new Set(['for_statement', 'while_statement']);

/** The semantic model of one module. */
export class ModuleAnalysis {
  readonly moduleScope: Scope;
  readonly scopes: Scope[] = [];
  /** Scope opened by a node (function, class, lambda, comprehension, module), by node id. */
  private readonly scopeByNode = new Map<number, Scope>();
  readonly classes: ClassInfo[] = [];
  readonly functions: FunctionInfo[] = [];
  readonly classByNode = new Map<number, ClassInfo>();
  readonly functionByNode = new Map<number, FunctionInfo>();
  /** Modules this one imports (qualified names as written, relative ones resolved). */
  readonly importedModules = new Set<string>();
  /** Cache of name resolution per identifier node id. */
  private readonly resolved = new Map<number, Binding[]>();

  constructor(
    readonly syntax: SyntaxFile,
    /** Dotted module name (`riverlab.models`); for scripts, the path-derived name. */
    readonly name: string,
    /** True when this module is `pkg/__init__.py` (relative imports resolve against the module itself). */
    readonly isPackage: boolean,
  ) {
    this.moduleScope = new Scope('module', syntax.root, null);
    this.scopes.push(this.moduleScope);
    this.scopeByNode.set(syntax.root.id, this.moduleScope);
    this.build();
  }

  /** The innermost scope that contains a node (a scope-opening node belongs to its parent's scope). */
  scopeOf(node: SyntaxNode): Scope {
    for (let n = node.parent; n; n = n.parent) {
      const scope = this.scopeByNode.get(n.id);
      if (scope) {
        // Default values, decorators and base classes are evaluated in the enclosing scope.
        if (scope.kind === 'function' || scope.kind === 'lambda' || scope.kind === 'class') {
          const body = n.child('body');
          if (body && !body.contains(node) && !(n.child('parameters')?.contains(node) && isParameterName(node))) continue;
        }
        if (scope.kind === 'comprehension') {
          // The first iterable of a comprehension is evaluated in the enclosing scope.
          const firstFor = n.children.find((c) => c.type === 'for_in_clause');
          const iterable = firstFor?.child('right');
          if (iterable && iterable.contains(node)) continue;
        }
        return scope;
      }
    }
    return this.moduleScope;
  }

  /** The scope a scope-opening node creates. */
  scopeFor(node: SyntaxNode): Scope | undefined {
    return this.scopeByNode.get(node.id);
  }

  /** The function (or method) whose body contains a node, if any. */
  enclosingFunction(node: SyntaxNode): FunctionInfo | null {
    for (let n = node.parent; n; n = n.parent) {
      if (n.type === 'function_definition') {
        const fn = this.functionByNode.get(n.id);
        if (fn && n.child('body')?.contains(node)) return fn;
      }
    }
    return null;
  }

  /** The class whose body contains a node (directly or inside one of its methods). */
  enclosingClass(node: SyntaxNode): ClassInfo | null {
    for (let n = node.parent; n; n = n.parent) {
      if (n.type === 'class_definition') return this.classByNode.get(n.id) ?? null;
    }
    return null;
  }

  /**
   * Bindings of an identifier that may reach this use: Python's scope rules (class bodies are not visible from
   * their methods), then within the defining scope the last binding before the use that is not conditional
   * relative to it, plus any conditional ones in between, plus later ones inside a loop around the use.
   */
  resolveName(identifier: SyntaxNode): Binding[] {
    const cached = this.resolved.get(identifier.id);
    if (cached) return cached;
    const result = this.lookup(identifier.text, identifier);
    this.resolved.set(identifier.id, result);
    return result;
  }

  /** Bindings of a name as seen from a node (see resolveName). */
  lookup(name: string, at: SyntaxNode): Binding[] {
    const useScope = this.scopeOf(at);
    let scope: Scope | null = useScope;
    if (useScope.globals.has(name)) scope = this.moduleScope;
    let first = true;
    while (scope) {
      if (first || scope.kind !== 'class') {
        const list = scope.bindings.get(name);
        if (list && list.length > 0) return scope === useScope ? reachingBindings(list, at) : list;
      }
      first = false;
      scope = scope.parent;
    }
    return [];
  }

  /** All bindings of a name in a scope (no flow ordering). */
  bindingsIn(scope: Scope, name: string): Binding[] {
    return scope.bindings.get(name) ?? [];
  }

  /** Module-level bindings of a name (what `from this_module import name` would see). */
  exported(name: string): Binding[] {
    return this.moduleScope.bindings.get(name) ?? [];
  }

  /** Resolves a relative import (`..pkg`) against this module's package. */
  resolveRelative(dots: number, rest: string): string {
    return relativeModuleName(this.name, this.isPackage, dots, rest);
  }

  private build(): void {
    const nodes = this.syntax.nodes;
    for (const node of nodes) {
      switch (node.type) {
        case 'function_definition':
          this.defineFunction(node);
          break;
        case 'class_definition':
          this.defineClass(node);
          break;
        case 'lambda': {
          const scope = this.openScope('lambda', node);
          const params = node.child('parameters');
          if (params) this.bindParameters(params, scope, null);
          break;
        }
        case 'list_comprehension':
        case 'set_comprehension':
        case 'dictionary_comprehension':
        case 'generator_expression':
          if (node.children.some((c) => c.type === 'for_in_clause')) this.openScope('comprehension', node);
          break;
        case 'for_in_clause': {
          const scope = this.scopeByNode.get(node.parent!.id) ?? this.scopeOf(node);
          const left = node.child('left');
          const right = node.child('right');
          if (left) this.bindTargets(left, right, scope, 'comprehension', true);
          break;
        }
        case 'import_statement':
          this.bindImport(node);
          break;
        case 'import_from_statement':
          this.bindImportFrom(node);
          break;
        case 'assignment':
          this.bindAssignment(node);
          break;
        case 'augmented_assignment': {
          const left = node.child('left');
          if (left?.type === 'identifier') this.addBinding(left, 'augassign', node);
          else if (left?.type === 'attribute') this.bindAttribute(left, node);
          break;
        }
        case 'for_statement': {
          const left = node.child('left');
          if (left) this.bindTargets(left, node.child('right'), this.scopeOf(node), 'for', true);
          break;
        }
        case 'with_item': {
          const value = node.child('value');
          if (value?.type === 'as_pattern') {
            const target = value.child('alias')?.namedChildren[0];
            const expr = value.namedChildren.find((c) => c.field !== 'alias') ?? null;
            if (target) this.bindTargets(target, expr, this.scopeOf(node), 'with', false);
          }
          break;
        }
        case 'except_clause': {
          const value = node.child('value');
          if (value?.type === 'as_pattern') {
            const target = value.child('alias')?.namedChildren[0];
            if (target?.type === 'identifier') this.addBinding(target, 'except', null);
          }
          break;
        }
        case 'named_expression': {
          const name = node.child('name');
          if (name) {
            let scope = this.scopeOf(node);
            while (scope.kind === 'comprehension' && scope.parent) scope = scope.parent;
            this.addBinding(name, 'walrus', node.child('value'), scope);
          }
          break;
        }
        case 'call':
          this.bindRegisteredAttribute(node);
          break;
        case 'global_statement':
        case 'nonlocal_statement': {
          const scope = this.scopeOf(node);
          for (const id of node.namedChildren) {
            if (id.type !== 'identifier') continue;
            (node.type === 'global_statement' ? scope.globals : scope.nonlocals).add(id.text);
          }
          break;
        }
        default:
          break;
      }
    }
  }

  private openScope(kind: Scope['kind'], node: SyntaxNode): Scope {
    const scope = new Scope(kind, node, this.scopeOf(node));
    this.scopes.push(scope);
    this.scopeByNode.set(node.id, scope);
    return scope;
  }

  private addBinding(target: SyntaxNode, kind: BindingKind, value: SyntaxNode | null, scopeOverride?: Scope, extra?: Partial<Binding>): Binding {
    let scope = scopeOverride ?? this.scopeOf(target);
    const name = target.text;
    if (scope.globals.has(name)) scope = this.moduleScope;
    else if (scope.nonlocals.has(name)) {
      for (let s = scope.parent; s; s = s.parent) {
        if (s.kind === 'function' && s.bindings.has(name)) {
          scope = s;
          break;
        }
      }
    }
    const binding: Binding = { name, kind, node: target, scope, value, ...extra };
    scope.add(binding);
    return binding;
  }

  private defineFunction(node: SyntaxNode): void {
    const nameNode = node.child('name');
    const outer = this.scopeOf(node);
    const scope = this.openScope('function', node);
    const owner = outer.kind === 'class' ? (this.classByNode.get(outer.node.id) ?? null) : null;
    const name = nameNode?.text ?? '<anonymous>';
    const prefix = owner ? owner.qualifiedName : qualifiedPrefix(this, outer);
    const decorators = node.parent?.type === 'decorated_definition' ? node.parent.children.filter((c) => c.type === 'decorator') : [];
    const info: FunctionInfo = { name, qualifiedName: `${prefix}.${name}`, node, scope, owner, params: [], returns: [], decorators };
    this.functions.push(info);
    this.functionByNode.set(node.id, info);
    if (owner) owner.methods.set(name, info);
    if (nameNode) this.addBinding(nameNode, 'def', null, outer, { definition: node });
    const params = node.child('parameters');
    if (params) info.params = this.bindParameters(params, scope, info);
    collectReturns(node, info.returns);
  }

  private defineClass(node: SyntaxNode): void {
    const nameNode = node.child('name');
    const outer = this.scopeOf(node);
    const scope = this.openScope('class', node);
    const name = nameNode?.text ?? '<anonymous>';
    const bases = (node.child('superclasses')?.namedChildren ?? []).filter((c) => c.type !== 'keyword_argument' && c.type !== 'list_splat' && c.type !== 'dictionary_splat');
    const info: ClassInfo = { name, qualifiedName: `${qualifiedPrefix(this, outer)}.${name}`, node, scope, module: this, bases, methods: new Map(), attributes: new Map() };
    this.classes.push(info);
    this.classByNode.set(node.id, info);
    if (nameNode) this.addBinding(nameNode, 'class', null, outer, { definition: node });
  }

  private bindParameters(params: SyntaxNode, scope: Scope, fn: FunctionInfo | null): Binding[] {
    const out: Binding[] = [];
    let index = 0;
    for (const p of params.namedChildren) {
      let nameNode: SyntaxNode | null = null;
      let value: SyntaxNode | null = null;
      let annotation: SyntaxNode | null = null;
      switch (p.type) {
        case 'identifier':
          nameNode = p;
          break;
        case 'typed_parameter':
          nameNode = p.namedChildren.find((c) => c.type === 'identifier' && c.field === null) ?? null;
          annotation = p.child('type');
          if (!nameNode) nameNode = p.namedChildren.find((c) => c.type === 'list_splat_pattern' || c.type === 'dictionary_splat_pattern')?.namedChildren[0] ?? null;
          break;
        case 'default_parameter':
        case 'typed_default_parameter':
          nameNode = p.child('name');
          value = p.child('value');
          annotation = p.child('type');
          break;
        case 'list_splat_pattern':
        case 'dictionary_splat_pattern':
          nameNode = p.namedChildren[0] ?? null;
          break;
        default:
          break;
      }
      if (!nameNode || nameNode.type !== 'identifier') continue;
      out.push(this.addBinding(nameNode, 'param', value, scope, { paramIndex: index, annotation, definition: fn?.node }));
      index++;
    }
    return out;
  }

  private bindImport(node: SyntaxNode): void {
    for (const item of node.childrenOf('name')) {
      if (item.type === 'dotted_name') {
        const full = item.text.replace(/\s+/g, '');
        const first = item.namedChildren[0];
        if (!first) continue;
        this.importedModules.add(full);
        // `import a.b.c` binds `a` to the package `a`; attribute access then walks into `a.b.c`.
        this.addBinding(first, 'import', null, undefined, { qualifiedName: first.text });
      } else if (item.type === 'aliased_import') {
        const target = item.child('name');
        const alias = item.child('alias');
        if (!target || !alias) continue;
        const full = target.text.replace(/\s+/g, '');
        this.importedModules.add(full);
        this.addBinding(alias, 'import', null, undefined, { qualifiedName: full });
      }
    }
  }

  private bindImportFrom(node: SyntaxNode): void {
    const moduleNode = node.child('module_name');
    if (!moduleNode) return;
    let moduleName: string;
    if (moduleNode.type === 'relative_import') {
      const prefix = moduleNode.children.find((c) => c.type === 'import_prefix');
      const dotted = moduleNode.children.find((c) => c.type === 'dotted_name');
      moduleName = this.resolveRelative(prefix ? prefix.text.length : 1, dotted ? dotted.text : '');
    } else moduleName = moduleNode.text.replace(/\s+/g, '');
    this.importedModules.add(moduleName);
    for (const item of node.childrenOf('name')) {
      if (item.type === 'dotted_name') {
        const name = item.text;
        this.addBinding(item, 'import', null, undefined, { qualifiedName: joinName(moduleName, name) });
        this.importedModules.add(joinName(moduleName, name));
      } else if (item.type === 'aliased_import') {
        const target = item.child('name');
        const alias = item.child('alias');
        if (!target || !alias) continue;
        this.addBinding(alias, 'import', null, undefined, { qualifiedName: joinName(moduleName, target.text) });
        this.importedModules.add(joinName(moduleName, target.text));
      }
    }
  }

  private bindAssignment(node: SyntaxNode): void {
    // A chained assignment `a = b = value` nests: the innermost right-hand side is the value of every target.
    if (node.parent?.type === 'assignment' && node.field === 'right') return;
    const targets: SyntaxNode[] = [];
    let value: SyntaxNode | null = null;
    let annotation: SyntaxNode | null = null;
    for (let n: SyntaxNode | null = node; n; ) {
      const left = n.child('left');
      if (left) targets.push(left);
      annotation = annotation ?? n.child('type');
      const right = n.child('right');
      if (right?.type === 'assignment') n = right;
      else {
        value = right;
        n = null;
      }
    }
    for (const target of targets) this.bindTargets(target, value, this.scopeOf(node), value ? 'assign' : 'annotation', false, annotation);
  }

  /**
   * Binds assignment targets, matching tuple targets to tuple values element by element where possible. Nested
   * targets are handled with an explicit stack in source order (no recursion: `((((a,),),),) = …` may nest deeply).
   */
  private bindTargets(target: SyntaxNode, value: SyntaxNode | null, scope: Scope, kind: BindingKind, iterated: boolean, annotation: SyntaxNode | null = null): void {
    type Work = { target: SyntaxNode; value: SyntaxNode | null; annotation: SyntaxNode | null } | { element: SyntaxNode; unpack: { from: SyntaxNode; index: number } | null };
    const stack: Work[] = [{ target, value, annotation }];
    while (stack.length > 0) {
      const work = stack.pop()!;
      if ('element' in work) {
        // An element of a tuple target whose value is not a literal tuple of the same length.
        const element = work.element;
        if (element.type === 'identifier') this.addBinding(element, kind, null, scope, work.unpack ? { unpack: work.unpack, iterated: iterated || undefined } : {});
        else {
          const id = element.namedChildren[0];
          if (id?.type === 'identifier') this.addBinding(id, kind, null, scope);
        }
        continue;
      }
      const t = work.target;
      switch (t.type) {
        case 'identifier':
          this.addBinding(t, kind, work.value, scope, { iterated: iterated || undefined, annotation: work.annotation });
          break;
        case 'attribute':
          if (!iterated) this.bindAttribute(t, work.value);
          break;
        case 'pattern_list':
        case 'tuple_pattern':
        case 'list_pattern':
        case 'expression_list':
        case 'tuple':
        case 'list': {
          const elements = t.namedChildren;
          const v = work.value;
          const values = v && !iterated && isSequenceLiteral(v) ? unwrapParens(v).namedChildren : null;
          const items: Work[] = elements.map((element, index): Work => {
            if (values && values.length === elements.length) return { target: element, value: values[index]!, annotation: null };
            if (element.type === 'identifier') return { element, unpack: v ? { from: v, index } : null };
            if (element.type === 'list_splat_pattern') return { element, unpack: null };
            return { target: element, value: null, annotation: null };
          });
          // Pushed in reverse so that the elements are bound in source order.
          for (let i = items.length - 1; i >= 0; i--) stack.push(items[i]!);
          break;
        }
        case 'parenthesized_expression': {
          const inner = t.namedChildren[0];
          if (inner) stack.push({ target: inner, value: work.value, annotation: work.annotation });
          break;
        }
        default:
          break;
      }
    }
  }

  /** Records `self.register_parameter('name', value)` / `self.register_buffer('name', value)` as attribute bindings. */
  private bindRegisteredAttribute(call: SyntaxNode): void {
    const fn = call.child('function');
    if (fn?.type !== 'attribute') return;
    const method = fn.child('attribute')?.text;
    if (method !== 'register_parameter' && method !== 'register_buffer') return;
    const object = fn.child('object');
    const args = call.child('arguments')?.namedChildren ?? [];
    const nameArg = args[0];
    if (!object || object.type !== 'identifier' || nameArg?.type !== 'string') return;
    const owner = this.enclosingFunction(call);
    if (!owner?.owner || owner.params[0]?.name !== object.text) return;
    const name = nameArg.children.filter((c) => c.type === 'string_content').map((c) => c.text).join('');
    if (!/^[A-Za-z_]\w*$/.test(name)) return;
    const value = args[1] && args[1].type !== 'keyword_argument' ? args[1] : (args.find((a) => a.type === 'keyword_argument' && /^(param|tensor)$/.test(a.child('name')?.text ?? ''))?.child('value') ?? null);
    const list = owner.owner.attributes.get(name) ?? [];
    list.push({ name, target: nameArg, value: method === 'register_buffer' ? null : value, method: owner });
    owner.owner.attributes.set(name, list);
  }

  /** Records `self.name = value` on the enclosing class (in methods) when the object is the method's first parameter. */
  private bindAttribute(target: SyntaxNode, value: SyntaxNode | null): void {
    const object = target.child('object');
    const attr = target.child('attribute');
    if (!object || !attr || object.type !== 'identifier') return;
    const fn = this.enclosingFunction(target);
    if (!fn || !fn.owner) return;
    const self = fn.params[0];
    if (!self || self.name !== object.text || isStaticMethod(fn)) return;
    const list = fn.owner.attributes.get(attr.text) ?? [];
    list.push({ name: attr.text, target, value, method: fn });
    fn.owner.attributes.set(attr.text, list);
  }
}

function isParameterName(node: SyntaxNode): boolean {
  const p = node.parent;
  if (!p) return false;
  if (p.type === 'parameters' || p.type === 'lambda_parameters') return true;
  if ((p.type === 'default_parameter' || p.type === 'typed_default_parameter') && node.field === 'name') return true;
  if (p.type === 'typed_parameter' && node.field === null) return true;
  return p.type === 'list_splat_pattern' || p.type === 'dictionary_splat_pattern';
}

function isStaticMethod(fn: FunctionInfo): boolean {
  return fn.decorators.some((d) => /^@\s*(staticmethod|classmethod)\b/.test(d.text));
}

function qualifiedPrefix(module: ModuleAnalysis, scope: Scope): string {
  const parts: string[] = [];
  for (let s: Scope | null = scope; s && s.kind !== 'module'; s = s.parent) {
    const name = s.node.child('name')?.text ?? '<scope>';
    parts.unshift(name);
  }
  return [module.name, ...parts].join('.');
}

function joinName(a: string, b: string): string {
  return a ? `${a}.${b}` : b;
}

function collectReturns(fnNode: SyntaxNode, out: SyntaxNode[]): void {
  const body = fnNode.child('body');
  if (!body) return;
  const stack: SyntaxNode[] = [body];
  while (stack.length) {
    const n = stack.pop()!;
    if (n.type === 'return_statement') {
      const expr = n.namedChildren[0];
      if (expr) out.push(expr);
      continue;
    }
    if (n.type === 'function_definition' || n.type === 'class_definition' || n.type === 'lambda') continue;
    for (let i = n.children.length - 1; i >= 0; i--) stack.push(n.children[i]!);
  }
}

/** The name an expression is assigned to (`w` in `w = …`, `weight` in `self.weight = …`), or null. */
export function assignedName(node: SyntaxNode): string | null {
  const parent = node.parent;
  if (parent?.type === 'assignment' && node.field === 'right') {
    const left = parent.child('left');
    if (left?.type === 'identifier') return left.text;
    if (left?.type === 'attribute') return left.child('attribute')?.text ?? null;
  }
  return null;
}

/** Strips parentheses around an expression. */
export function unwrapParens(node: SyntaxNode): SyntaxNode {
  let n = node;
  while (n.type === 'parenthesized_expression' && n.namedChildren.length === 1) n = n.namedChildren[0]!;
  return n;
}

function isSequenceLiteral(node: SyntaxNode): boolean {
  const n = unwrapParens(node);
  return n.type === 'tuple' || n.type === 'list' || n.type === 'expression_list';
}

/** Chain of conditional constructs between a node and its scope node (innermost first). */
function conditionalChain(node: SyntaxNode, scopeNode: SyntaxNode): SyntaxNode[] {
  const out: SyntaxNode[] = [];
  for (let n = node.parent; n && n !== scopeNode; n = n.parent) if (CONDITIONAL_TYPES.has(n.type)) out.push(n);
  return out;
}

/**
 * Flow approximation inside one scope: walking back from the use, every binding is kept until one is found
 * whose conditional context encloses the use's (it dominates the use); bindings after the use count only when a
 * loop encloses both. A binding takes effect after its value is evaluated (`x = x + 1` reads the earlier `x`), and
 * a binding made from a nested function (`global`/`nonlocal`) may reach but never dominates.
 */
function reachingBindings(list: Binding[], use: SyntaxNode): Binding[] {
  if (list.length === 1) return list;
  const scopeNode = list[0]!.scope.node;
  const useChain = conditionalChain(use, scopeNode);
  const out: Binding[] = [];
  let dominated = false;
  for (let i = list.length - 1; i >= 0; i--) {
    const b = list[i]!;
    if (bindingPoint(b) > use.start) {
      if (b.kind === 'for' || b.kind === 'with' || b.kind === 'comprehension') {
        // A comprehension's element is written before its `for` clause but runs after the target is bound.
        if (b.node.start === use.start || (b.value && !b.value.contains(use) && b.node.parent && useInsideStatementOf(b, use))) {
          out.push(b);
          continue;
        }
      }
      // A later binding reaches around a loop, except into a `for` loop's iterable (evaluated once, before the loop).
      const loop = useChain.find((c) => LOOP_TYPES.has(c.type) && c.contains(b.node) && !(c.type === 'for_statement' && c.child('right')?.contains(use)));
      if (loop) out.push(b);
      continue;
    }
    if (dominated) continue;
    out.push(b);
    if (insideNestedFunction(b.node, scopeNode)) continue;
    const chain = conditionalChain(b.node, scopeNode);
    if (chain.every((c) => useChain.includes(c))) dominated = true;
  }
  return out.length > 0 ? out.reverse() : list;
}

/** Offset at which a binding takes effect: after the value it is bound to has been evaluated. */
function bindingPoint(b: Binding): number {
  if (b.kind === 'assign' || b.kind === 'augassign' || b.kind === 'walrus' || b.kind === 'with' || b.kind === 'for' || b.kind === 'comprehension') {
    const value = b.value ?? b.unpack?.from ?? null;
    if (value) return Math.max(b.node.start, value.end);
  }
  return b.node.start;
}

/** True when a node lies inside a function or lambda nested in the scope node (a `global`/`nonlocal` write). */
function insideNestedFunction(node: SyntaxNode, scopeNode: SyntaxNode): boolean {
  for (let n = node.parent; n && n !== scopeNode; n = n.parent) if (n.type === 'function_definition' || n.type === 'lambda') return true;
  return false;
}

function useInsideStatementOf(binding: Binding, use: SyntaxNode): boolean {
  const stmt = binding.node.closest('for_statement', 'with_statement', 'for_in_clause', 'list_comprehension', 'generator_expression', 'set_comprehension', 'dictionary_comprehension');
  return stmt !== null && stmt.contains(use);
}
