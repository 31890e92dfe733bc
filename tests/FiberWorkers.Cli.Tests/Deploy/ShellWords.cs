using System.Text;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>A word of a shell command line: its text after quote removal and expansion, and how it was written.</summary>
internal sealed record ShellWord(string Text, string Raw, bool IsOperator, int Start)
{
    /// <summary>Variables the word uses that the resolver did not know.</summary>
    public List<string> Unknown { get; } = [];
}

/// <summary>A command line as the shell reads it, possibly continued over several physical lines.</summary>
internal sealed record LogicalLine(int Line, string Text, IReadOnlyList<int> Joins)
{
    /// <summary>The physical line number of a position in <see cref="Text"/>.</summary>
    public int LineOf(int offset) => Line + Joins.Count(j => j <= offset);
}

/// <summary>
/// Splits the shell command lines of deploy/ (the Slurm script, README examples) into words the way bash would for
/// the forms they use: quotes, backslashes, <c>$VAR</c>, <c>${VAR}</c>, <c>${VAR:-default}</c> (nested), <c>$(…)</c>
/// (opaque), control operators and redirections. Not a shell: enough to find and check the <c>fiber</c> command lines.
/// </summary>
internal static class ShellWords
{
    /// <summary>
    /// Logical lines: physical lines joined at trailing backslashes, each with the number of its first line and the
    /// offsets in the joined text where its later physical lines begin.
    /// </summary>
    public static IEnumerable<LogicalLine> LogicalLines(IReadOnlyList<string> lines)
    {
        for (var k = 0; k < lines.Count; k++)
        {
            var first = k;
            var text = new StringBuilder(lines[k]);
            var joins = new List<int>();
            while (text.Length > 0 && text[^1] == '\\' && k + 1 < lines.Count)
            {
                text.Length--;
                text.Append(' ');
                joins.Add(text.Length);
                text.Append(lines[++k]);
            }

            yield return new LogicalLine(first + 1, text.ToString(), joins);
        }
    }

    /// <summary>
    /// The words of <paramref name="line"/>; <paramref name="resolve"/> gives a variable's value (null: unknown,
    /// recorded in <see cref="ShellWord.Unknown"/> and expanded to "dynamic-NAME").
    /// </summary>
    public static List<ShellWord> Split(string line, Func<string, string?> resolve)
    {
        var words = new List<ShellWord>();
        var position = 0;
        while (true)
        {
            while (position < line.Length && char.IsWhiteSpace(line[position]))
            {
                position++;
            }

            if (position >= line.Length || line[position] == '#')
            {
                return words;
            }

            var start = position;
            if (Operator(line, position) is { } op)
            {
                position += op.Length;
                words.Add(new ShellWord(op, op, IsOperator: true, start));
                continue;
            }

            var text = new StringBuilder();
            var unknown = new List<string>();
            while (position < line.Length && !char.IsWhiteSpace(line[position]) && Operator(line, position) is null)
            {
                var c = line[position];
                if (c == '\'')
                {
                    var end = line.IndexOf('\'', position + 1);
                    end = end < 0 ? line.Length : end;
                    text.Append(line, position + 1, end - position - 1);
                    position = Math.Min(end + 1, line.Length);
                }
                else if (c == '"')
                {
                    position++;
                    while (position < line.Length && line[position] != '"')
                    {
                        if (line[position] == '\\' && position + 1 < line.Length && line[position + 1] is '"' or '\\' or '$' or '`')
                        {
                            text.Append(line[position + 1]);
                            position += 2;
                        }
                        else if (line[position] == '$')
                        {
                            position = Expand(line, position, text, resolve, unknown);
                        }
                        else
                        {
                            text.Append(line[position++]);
                        }
                    }

                    position++;
                }
                else if (c == '\\' && position + 1 < line.Length)
                {
                    text.Append(line[position + 1]);
                    position += 2;
                }
                else if (c == '$')
                {
                    position = Expand(line, position, text, resolve, unknown);
                }
                else
                {
                    text.Append(c);
                    position++;
                }
            }

            var word = new ShellWord(text.ToString(), line[start..position], IsOperator: false, start);
            word.Unknown.AddRange(unknown);
            words.Add(word);
        }
    }

    private static string? Operator(string line, int position)
    {
        foreach (var op in new[] { "2>&1", "&&", "||", ">>", "2>", "&", ";", "|", "(", ")", ">", "<" })
        {
            if (string.CompareOrdinal(line, position, op, 0, op.Length) == 0)
            {
                return op;
            }
        }

        return null;
    }

    /// <summary>Expands the expansion starting at <c>line[position] == '$'</c>; returns the position after it.</summary>
    private static int Expand(string line, int position, StringBuilder text, Func<string, string?> resolve, List<string> unknown)
    {
        var next = position + 1;
        if (next < line.Length && line[next] == '(')
        {
            var end = Matching(line, next, '(', ')');
            var inner = line[(next + 1)..end];
            unknown.Add($"$({inner})");
            text.Append("dynamic");
            return end + 1;
        }

        if (next < line.Length && line[next] == '{')
        {
            var end = Matching(line, next, '{', '}');
            var inner = line[(next + 1)..end];
            var name = new string([.. inner.TakeWhile(ch => char.IsAsciiLetterOrDigit(ch) || ch == '_')]);
            var rest = inner[name.Length..];
            var value = name.Length > 0 ? resolve(name) : null;
            if (rest.StartsWith(":-", StringComparison.Ordinal) || rest.StartsWith('-'))
            {
                var fallback = rest[(rest.StartsWith(":-", StringComparison.Ordinal) ? 2 : 1)..];
                if (string.IsNullOrEmpty(value))
                {
                    var inside = Split($"\"{fallback}\"", resolve);
                    value = inside.Count == 0 ? string.Empty : inside[0].Text;
                    unknown.AddRange(inside.SelectMany(w => w.Unknown));
                }
            }
            else if (rest.Length > 0)
            {
                // ${NODES[0]}, ${VAR#prefix} and the like: opaque here.
                unknown.Add($"${{{inner}}}");
                value = $"dynamic-{name.ToLowerInvariant().Replace('_', '-')}";
            }

            Append(name, value, text, unknown);
            return end + 1;
        }

        var length = 0;
        while (next + length < line.Length && (char.IsAsciiLetterOrDigit(line[next + length]) || line[next + length] == '_'))
        {
            length++;
        }

        if (length == 0)
        {
            // $!, $?, $$ and a lone $.
            if (next < line.Length && line[next] is '!' or '?' or '$' or '#' or '@' or '*')
            {
                unknown.Add($"${line[next]}");
                text.Append("dynamic");
                return next + 1;
            }

            text.Append('$');
            return next;
        }

        var variable = line.Substring(next, length);
        Append(variable, resolve(variable), text, unknown);
        return next + length;
    }

    private static void Append(string name, string? value, StringBuilder text, List<string> unknown)
    {
        if (value is null)
        {
            unknown.Add(name);
            text.Append("dynamic-").Append(name.ToLowerInvariant().Replace('_', '-'));
        }
        else
        {
            text.Append(value);
        }
    }

    private static int Matching(string line, int open, char opening, char closing)
    {
        var depth = 0;
        for (var k = open; k < line.Length; k++)
        {
            if (line[k] == opening)
            {
                depth++;
            }
            else if (line[k] == closing && --depth == 0)
            {
                return k;
            }
        }

        return line.Length - 1;
    }
}
