using System.Globalization;

namespace Strayspot.Scoring.Logits;

public static partial class Npy
{
    /// <summary>
    /// Parses the header dict: a Python literal with the keys 'descr' (string), 'fortran_order' (bool) and
    /// 'shape' (tuple of ints). Deliberately small: it accepts the literals the format allows and nothing else.
    /// </summary>
    private ref struct HeaderParser
    {
        private readonly string _text;
        private int _pos;

        private HeaderParser(string text) { _text = text; _pos = 0; }

        public static Header Parse(string text)
        {
            var p = new HeaderParser(text);
            return p.ParseDict();
        }

        private Header ParseDict()
        {
            string? descr = null;
            bool? fortran = null;
            int[]? shape = null;
            Expect('{');
            while (true)
            {
                SkipSpace();
                if (Peek() == '}') { _pos++; break; }
                string key = ParseString();
                Expect(':');
                SkipSpace();
                switch (key)
                {
                    case "descr": descr = ParseString(); break;
                    case "fortran_order": fortran = ParseBool(); break;
                    case "shape": shape = ParseShape(); break;
                    default: throw Bad($"unexpected key '{key}'");
                }
                SkipSpace();
                if (Peek() == ',') { _pos++; continue; }
                Expect('}');
                break;
            }
            SkipSpace();
            if (_pos != _text.Length)
                throw Bad("text after the closing brace");
            if (descr is null || fortran is null || shape is null)
                throw Bad("it needs the keys 'descr', 'fortran_order' and 'shape'");
            if (fortran.Value)
                throw Format("fortran_order True is not supported; save the array in C order.");
            return new Header(descr, shape);
        }

        private string ParseString()
        {
            SkipSpace();
            char quote = Peek();
            if (quote is not ('\'' or '"')) throw Bad("expected a quoted string");
            int end = _text.IndexOf(quote, _pos + 1);
            if (end < 0) throw Bad("unterminated string");
            string value = _text.Substring(_pos + 1, end - _pos - 1);
            _pos = end + 1;
            return value;
        }

        private bool ParseBool()
        {
            if (Match("True")) return true;
            if (Match("False")) return false;
            throw Bad("'fortran_order' must be True or False");
        }

        private int[] ParseShape()
        {
            Expect('(');
            var dims = new List<int>();
            while (true)
            {
                SkipSpace();
                if (Peek() == ')') { _pos++; break; }
                int start = _pos;
                while (_pos < _text.Length && char.IsAsciiDigit(_text[_pos])) _pos++;
                // Python may write long integers with an 'L' suffix (older writers).
                string digits = _text[start.._pos];
                if (_pos < _text.Length && _text[_pos] == 'L') _pos++;
                if (digits.Length == 0) throw Bad("a shape entry is not a non-negative integer");
                if (!int.TryParse(digits, NumberStyles.None, CultureInfo.InvariantCulture, out int d))
                    throw Format($"shape dimension {digits} is larger than {int.MaxValue}.");
                dims.Add(d);
                SkipSpace();
                if (Peek() == ',') { _pos++; continue; }
                Expect(')');
                break;
            }
            return dims.ToArray();
        }

        private bool Match(string word)
        {
            if (string.CompareOrdinal(_text, _pos, word, 0, word.Length) != 0) return false;
            _pos += word.Length;
            return true;
        }

        private void Expect(char c)
        {
            SkipSpace();
            if (Peek() != c) throw Bad($"expected '{c}' at offset {_pos}");
            _pos++;
        }

        private char Peek() => _pos < _text.Length ? _text[_pos] : '\0';

        private void SkipSpace()
        {
            while (_pos < _text.Length && _text[_pos] is ' ' or '\n' or '\t' or '\r') _pos++;
        }

        private ScoringInputException Bad(string what) => Format($"bad header ({what}): {Shorten(_text)}");

        private static string Shorten(string text) =>
            text.Length <= 200 ? text.TrimEnd() : text[..200] + "…";
    }
}
