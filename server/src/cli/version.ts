// The version the CLI, the server and reports print; kept in step with package.json by a test.
export const VERSION = '0.1.0';
export const TOOL_NAME = 'regwise';
export const INFORMATION_URI = 'https://github.com/regwise/regwise';
