using System.Globalization;

namespace FiberWorkers.Algebra.Parsing;

/// <summary>
/// Recursive-descent parser for equation text: numbers (decimal, scientific), identifiers,
/// binary + - * /, unary -, ^ with a non-negative integer literal, and parentheses.
/// Precedence from low to high: + -, * /, unary -, ^ (so -x^2 is -(x^2)).
/// </summary>
internal sealed class ExpressionParser
{
    private readonly string _text;
    private readonly int _maxNodes;
    private readonly int _maxDepth;
    private readonly int _maxExponent;
    private int _position;
    private int _nodes;
    private int _depth;

    private ExpressionParser(string text, int maxNodes, int maxDepth, int maxExponent)
    {
        _text = text;
        _maxNodes = maxNodes;
        _maxDepth = maxDepth;
        _maxExponent = maxExponent;
    }

    /// <summary>Parses one equation; throws <see cref="ExpressionSyntaxException"/> with the column of the problem.</summary>
    public static ExpressionNode Parse(string text, int maxNodes, int maxDepth, int maxExponent)
    {
        ArgumentNullException.ThrowIfNull(text);
        var parser = new ExpressionParser(text, maxNodes, maxDepth, maxExponent);
        parser.SkipWhitespace();
        if (parser.AtEnd)
        {
            throw new ExpressionSyntaxException(1, "the equation is empty");
        }

        var node = parser.ParseSum();
        parser.SkipWhitespace();
        if (!parser.AtEnd)
        {
            var c = parser._text[parser._position];
            var what = c == ')' ? "unmatched ')'" : $"unexpected {Describe(c)}; expected an operator";
            throw new ExpressionSyntaxException(parser.Column, what);
        }

        return node;
    }

    private bool AtEnd => _position >= _text.Length;

    private int Column => _position + 1;

    private ExpressionNode ParseSum()
    {
        var left = ParseProduct();
        while (true)
        {
            SkipWhitespace();
            if (AtEnd || (_text[_position] != '+' && _text[_position] != '-'))
            {
                break;
            }

            var column = Column;
            var op = _text[_position] == '+' ? BinaryOperator.Add : BinaryOperator.Subtract;
            _position++;
            var right = ParseProduct();
            left = Count(new BinaryNode(column, op, left, right));
        }

        return left;
    }

    private ExpressionNode ParseProduct()
    {
        var left = ParseUnary();
        while (true)
        {
            SkipWhitespace();
            if (AtEnd || (_text[_position] != '*' && _text[_position] != '/'))
            {
                break;
            }

            var column = Column;
            var op = _text[_position] == '*' ? BinaryOperator.Multiply : BinaryOperator.Divide;
            _position++;
            var right = ParseUnary();
            left = Count(new BinaryNode(column, op, left, right));
        }

        return left;
    }

    private ExpressionNode ParseUnary()
    {
        SkipWhitespace();
        if (!AtEnd && _text[_position] == '-')
        {
            var column = Column;
            _position++;
            Enter(column);
            var operand = ParseUnary();
            Leave();
            return Count(new NegateNode(column, operand));
        }

        return ParsePower();
    }

    private ExpressionNode ParsePower()
    {
        var baseNode = ParsePrimary();
        SkipWhitespace();
        if (AtEnd || _text[_position] != '^')
        {
            return baseNode;
        }

        var caretColumn = Column;
        _position++;
        SkipWhitespace();
        var exponentColumn = Column;
        var exponentText = ReadIntegerLiteral();
        if (exponentText is null)
        {
            if (!AtEnd && _text[_position] == '-')
            {
                throw new ExpressionSyntaxException(
                    exponentColumn, "bad exponent: a negative exponent is not allowed; '^' must be followed by a non-negative integer literal");
            }

            var found = AtEnd ? "the end of the equation" : Describe(_text[_position]);
            throw new ExpressionSyntaxException(
                exponentColumn, $"bad exponent: '^' must be followed by a non-negative integer literal, found {found}");
        }

        if (!AtEnd && (_text[_position] == '.' || _text[_position] == 'e' || _text[_position] == 'E'))
        {
            // Quote the whole literal (2.5, 1e2) rather than the integer prefix the exponent stopped at.
            var literal = _text[(exponentColumn - 1)..ScanNumberEnd()];
            throw new ExpressionSyntaxException(
                exponentColumn, $"bad exponent: {literal} is not an integer; '^' must be followed by a non-negative integer literal");
        }

        if (!int.TryParse(exponentText, NumberStyles.None, CultureInfo.InvariantCulture, out var exponent)
            || exponent > _maxExponent)
        {
            throw new ExpressionSyntaxException(
                exponentColumn, $"bad exponent: {exponentText} exceeds the degree limit {_maxExponent}");
        }

        SkipWhitespace();
        if (!AtEnd && _text[_position] == '^')
        {
            throw new ExpressionSyntaxException(
                Column, "chained '^' is ambiguous; write (a^b)^c with parentheses");
        }

        return Count(new PowerNode(caretColumn, baseNode, exponent));
    }

    private ExpressionNode ParsePrimary()
    {
        SkipWhitespace();
        if (AtEnd)
        {
            throw new ExpressionSyntaxException(Column, "unexpected end of the equation; expected a number, a name or '('");
        }

        var c = _text[_position];
        var column = Column;
        if (c == '(')
        {
            _position++;
            Enter(column);
            var inner = ParseSum();
            Leave();
            SkipWhitespace();
            if (AtEnd || _text[_position] != ')')
            {
                throw new ExpressionSyntaxException(column, "unclosed '('");
            }

            _position++;
            return inner;
        }

        if (char.IsAsciiDigit(c) || c == '.')
        {
            return Count(ReadNumber());
        }

        if (char.IsAsciiLetter(c) || c == '_')
        {
            var start = _position;
            while (!AtEnd && (char.IsAsciiLetterOrDigit(_text[_position]) || _text[_position] == '_'))
            {
                _position++;
            }

            return Count(new NameNode(column, _text[start.._position]));
        }

        var expected = c == ')' ? "unexpected ')'; expected a number, a name or '('"
            : c is '+' or '*' or '/' or '^' ? $"unexpected '{c}'; expected a number, a name or '('"
            : $"unexpected {Describe(c)}";
        throw new ExpressionSyntaxException(column, expected);
    }

    private NumberNode ReadNumber()
    {
        var column = Column;
        var start = _position;
        while (!AtEnd && char.IsAsciiDigit(_text[_position]))
        {
            _position++;
        }

        if (!AtEnd && _text[_position] == '.')
        {
            _position++;
            var fractionStart = _position;
            while (!AtEnd && char.IsAsciiDigit(_text[_position]))
            {
                _position++;
            }

            if (_position == fractionStart)
            {
                throw new ExpressionSyntaxException(column, "a decimal point must be followed by digits");
            }
        }

        if (!AtEnd && (_text[_position] == 'e' || _text[_position] == 'E'))
        {
            _position++;
            if (!AtEnd && (_text[_position] == '+' || _text[_position] == '-'))
            {
                _position++;
            }

            var digitsStart = _position;
            while (!AtEnd && char.IsAsciiDigit(_text[_position]))
            {
                _position++;
            }

            if (_position == digitsStart)
            {
                throw new ExpressionSyntaxException(column, "the exponent of a number in scientific notation needs digits");
            }
        }

        if (!AtEnd && (char.IsAsciiLetter(_text[_position]) || _text[_position] == '_'))
        {
            throw new ExpressionSyntaxException(
                Column, $"a name cannot follow the number '{_text[start.._position]}' directly; write '*' between them");
        }

        var text = _text[start.._position];
        var value = double.Parse(text, NumberStyles.Float, CultureInfo.InvariantCulture);
        if (!double.IsFinite(value))
        {
            throw new ExpressionSyntaxException(column, $"the number {text} is too large for double precision");
        }

        return new NumberNode(column, value, text);
    }

    /// <summary>Where the decimal or scientific number continuing at the current position ends (for quoting it).</summary>
    private int ScanNumberEnd()
    {
        var end = _position;
        if (end < _text.Length && _text[end] == '.')
        {
            end++;
            while (end < _text.Length && char.IsAsciiDigit(_text[end]))
            {
                end++;
            }
        }

        if (end < _text.Length && (_text[end] == 'e' || _text[end] == 'E'))
        {
            end++;
            if (end < _text.Length && (_text[end] == '+' || _text[end] == '-'))
            {
                end++;
            }

            while (end < _text.Length && char.IsAsciiDigit(_text[end]))
            {
                end++;
            }
        }

        return end;
    }

    private string? ReadIntegerLiteral()
    {
        var start = _position;
        while (!AtEnd && char.IsAsciiDigit(_text[_position]))
        {
            _position++;
        }

        return _position == start ? null : _text[start.._position];
    }

    private void SkipWhitespace()
    {
        while (!AtEnd && char.IsWhiteSpace(_text[_position]))
        {
            _position++;
        }
    }

    private T Count<T>(T node)
        where T : ExpressionNode
    {
        if (++_nodes > _maxNodes)
        {
            throw new ExpressionSyntaxException(node.Column, $"the equation has more than {_maxNodes} expression nodes (limit)");
        }

        return node;
    }

    // Only '(' and unary '-' recurse without consuming a whole operand, so they are the levels that bound the stack.
    private void Enter(int column)
    {
        if (++_depth > _maxDepth)
        {
            throw new ExpressionSyntaxException(column, $"the equation nests deeper than {_maxDepth} levels (limit)");
        }
    }

    private void Leave() => _depth--;

    private static string Describe(char c) =>
        char.IsControl(c) || c > '~' ? $"character U+{(int)c:X4}" : $"'{c}'";
}
