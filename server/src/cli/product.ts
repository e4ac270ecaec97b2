// The tool's identity as the outputs state it: name, version, home page and where each rule's page lives.
import serverPackage from '../../package.json';

/** The product and command name. */
export const PRODUCT_NAME = 'noisewise';

/** The version of this build (from server/package.json). */
export const VERSION: string = serverPackage.version;

/** The project's home page, given to SARIF viewers as the tool's information URI. */
export const INFORMATION_URI = 'https://github.com/noisewise/noisewise';

/** The published page of a rule (the generated docs/rules/<id>.md of the repository). */
export function ruleHelpUri(ruleId: string): string {
  return `${INFORMATION_URI}/blob/main/docs/rules/${encodeURIComponent(ruleId)}.md`;
}
