/**
 * Hostile values for quoting and rendering tests: everything that means something to bash or to a
 * scheduler directive line. (Common practice: the characters listed as special in the GNU Bash
 * Reference Manual, section 3.1 "Shell Syntax" and 3.5 "Shell Expansions".)
 */
export const HOSTILE: string[] = [
  '',
  'plain',
  "it's",
  "'",
  "'''",
  "\\'",
  '"double" quotes',
  'back\\slash\\',
  '\\',
  '$(touch PWNED_SUBST)',
  '`touch PWNED_BACKTICK`',
  '$HOME ${HOME} $((1+1)) $$ $? $0 $1 $@',
  'a;b && c || d | e & f > g < h',
  'line1\nline2\n',
  '\n',
  'tab\there\rcarriage',
  'ctrl \x01\x02\x1b[31m \x7f',
  'ü 日本語 émoji 🚀 ',
  '* ? [a] ~ ~root',
  '-n',
  '--',
  '!! !$ !-1',
  '#not a comment',
  '%s%n%d\\n',
  "$'ansi' $\"locale\"",
  '{{task_dir}} {{command}} }} {{',
  '   leading and trailing spaces   ',
  `mix '"\`$(\n)\`"' \\ ; && ü`,
  'x'.repeat(5000) + "'" + 'y'.repeat(5000),
];
