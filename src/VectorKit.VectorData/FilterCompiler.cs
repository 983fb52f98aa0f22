using System.Collections;
using System.Globalization;
using System.Linq.Expressions;
using Microsoft.Extensions.VectorData.ProviderServices;
using Microsoft.Extensions.VectorData.ProviderServices.Filter;

namespace VectorKit.VectorData;

/// <summary>
/// Compiles a filter expression once into a predicate over stored records, evaluated during the index search.
/// Supported: <c>==</c>, <c>!=</c>, <c>&lt;</c>, <c>&lt;=</c>, <c>&gt;</c>, <c>&gt;=</c> between a data or key
/// property and a value; <c>&amp;&amp;</c>, <c>||</c>, <c>!</c>; a bool property alone; <c>Contains</c> on a collection
/// property (a tag test) or on a collection of values (a membership test); the constants <c>true</c> and <c>false</c>.
/// Anything else throws <see cref="NotSupportedException"/> naming the unsupported node.
/// </summary>
/// <remarks>
/// The semantics are those of LINQ to objects on the record: lifted comparisons with a null operand are false
/// (equality of two nulls is true), a property converted in the expression (a float compared with a double constant)
/// is converted the same way before comparing, and NaN compares unequal to everything.
/// </remarks>
internal sealed class FilterCompiler : FilterTranslatorBase
{
    private static readonly FilterPreprocessingOptions Preprocessing = new() { SupportsParameterization = false };

    public Func<StoredRecord, bool> Compile(LambdaExpression filter, CollectionModel model)
    {
        ArgumentNullException.ThrowIfNull(filter);
        Expression body = PreprocessFilter(filter, model, Preprocessing);
        return Predicate(body);
    }

    private Func<StoredRecord, bool> Predicate(Expression node)
    {
        switch (node)
        {
            case BinaryExpression { NodeType: ExpressionType.AndAlso } and:
                {
                    Func<StoredRecord, bool> left = Predicate(and.Left), right = Predicate(and.Right);
                    return r => left(r) && right(r);
                }

            case BinaryExpression { NodeType: ExpressionType.OrElse } or:
                {
                    Func<StoredRecord, bool> left = Predicate(or.Left), right = Predicate(or.Right);
                    return r => left(r) || right(r);
                }

            case UnaryExpression { NodeType: ExpressionType.Not } not:
                {
                    Func<StoredRecord, bool> inner = Predicate(not.Operand);
                    return r => !inner(r);
                }

            case BinaryExpression { NodeType: ExpressionType.Equal or ExpressionType.NotEqual or ExpressionType.LessThan
                or ExpressionType.LessThanOrEqual or ExpressionType.GreaterThan or ExpressionType.GreaterThanOrEqual } comparison:
                return Comparison(comparison);

            case ConstantExpression { Value: bool constant }:
                return _ => constant;

            case MethodCallExpression call when TryMatchContains(call, out Expression? source, out Expression? item):
                return Contains(call, source, item);

            default:
                if (node.Type == typeof(bool) && TryOperand(node, out Func<StoredRecord, object?>? flag, out bool isProperty) && isProperty)
                {
                    return r => flag(r) is true;
                }

                throw Unsupported(node);
        }
    }

    private Func<StoredRecord, bool> Comparison(BinaryExpression comparison)
    {
        if (comparison.Method is not null && comparison.Method.DeclaringType != typeof(string) && comparison.Method.DeclaringType != typeof(decimal)
            && comparison.Method.DeclaringType != typeof(DateTime) && comparison.Method.DeclaringType != typeof(DateTimeOffset)
            && comparison.Method.DeclaringType != typeof(Guid))
        {
            throw Unsupported(comparison);
        }

        if (!TryOperand(comparison.Left, out Func<StoredRecord, object?>? left, out _) || !TryOperand(comparison.Right, out Func<StoredRecord, object?>? right, out _))
        {
            throw Unsupported(comparison);
        }

        ExpressionType op = comparison.NodeType;
        return op switch
        {
            ExpressionType.Equal => r => ValuesEqual(left(r), right(r)),
            ExpressionType.NotEqual => r => !ValuesEqual(left(r), right(r)),
            _ => r => Relational(op, left(r), right(r)),
        };
    }

    private Func<StoredRecord, bool> Contains(MethodCallExpression call, Expression source, Expression item)
    {
        if (!TryOperand(source, out Func<StoredRecord, object?>? collection, out _) || !TryOperand(item, out Func<StoredRecord, object?>? value, out _))
        {
            throw Unsupported(call);
        }

        return r =>
        {
            if (collection(r) is not IEnumerable values)
            {
                return false;
            }

            object? wanted = value(r);
            foreach (object? candidate in values)
            {
                if (ValuesEqual(candidate, wanted))
                {
                    return true;
                }
            }

            return false;
        };
    }

    /// <summary>A property (possibly converted) or a constant, as a getter over stored records.</summary>
    private bool TryOperand(Expression node, [System.Diagnostics.CodeAnalysis.NotNullWhen(true)] out Func<StoredRecord, object?>? getter, out bool isProperty)
    {
        if (node is UnaryExpression { NodeType: ExpressionType.Convert or ExpressionType.ConvertChecked } convert && convert.Method is null)
        {
            if (!TryOperand(convert.Operand, out Func<StoredRecord, object?>? inner, out isProperty))
            {
                getter = null;
                return false;
            }

            Type target = Nullable.GetUnderlyingType(convert.Type) ?? convert.Type;
            if (target == typeof(object) || !IsConvertible(target))
            {
                getter = inner;
                return true;
            }

            getter = r => inner(r) is { } v ? ConvertValue(v, target) : null;
            return true;
        }

        if (node is ConstantExpression constant)
        {
            object? value = constant.Value;
            getter = _ => value;
            isProperty = false;
            return true;
        }

        if (TryBindProperty(node, out PropertyModel? property) && property is not VectorPropertyModel)
        {
            string name = property.StorageName;
            getter = property is KeyPropertyModel ? static r => r.Key : r => r.Values.GetValueOrDefault(name);
            isProperty = true;
            return true;
        }

        getter = null;
        isProperty = false;
        return false;
    }

    private static bool IsConvertible(Type type) => type.IsPrimitive || type == typeof(decimal);

    private static object ConvertValue(object value, Type target) =>
        value.GetType() == target ? value : System.Convert.ChangeType(value, target, CultureInfo.InvariantCulture);

    internal static bool ValuesEqual(object? a, object? b) => (a, b) switch
    {
        (null, null) => true,
        (null, _) or (_, null) => false,
        (double x, double y) => x == y,
        (float x, float y) => x == y,
        _ => a.Equals(b),
    };

    private static bool Relational(ExpressionType op, object? a, object? b)
    {
        if (a is null || b is null)
        {
            return false;
        }

        if (a is double x && b is double y)
        {
            return Apply(op, x, y);
        }

        if (a is float f && b is float g)
        {
            return Apply(op, f, g);
        }

        int c = a is string s && b is string t ? string.CompareOrdinal(s, t) : ((IComparable)a).CompareTo(b);
        return Apply(op, c, 0);
    }

    private static bool Apply<T>(ExpressionType op, T x, T y)
        where T : System.Numerics.IComparisonOperators<T, T, bool> => op switch
        {
            ExpressionType.LessThan => x < y,
            ExpressionType.LessThanOrEqual => x <= y,
            ExpressionType.GreaterThan => x > y,
            _ => x >= y,
        };

    private static NotSupportedException Unsupported(Expression node) =>
        new($"The filter expression '{node}' ({node.NodeType}) is not supported by VectorKit. Supported: ==, !=, <, <=, >, >= between a "
            + "data or key property and a value; &&, ||, !; a bool property; Contains on a collection property or on a collection of values.");
}
