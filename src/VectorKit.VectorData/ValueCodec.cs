using System.Buffers.Binary;
using System.Collections;
using System.Text;
using Microsoft.Extensions.AI;

namespace VectorKit.VectorData;

/// <summary>
/// The stored form of property values: scalars as themselves, collections as a private array copy, vectors as a
/// private <c>float[]</c>; and their binary form in a collection file (one type byte, then the value).
/// </summary>
internal static class ValueCodec
{
    private const byte NullCode = 0;
    private const byte StringCode = 1;
    private const byte BoolCode = 2;
    private const byte IntCode = 3;
    private const byte LongCode = 4;
    private const byte FloatCode = 5;
    private const byte DoubleCode = 6;
    private const byte DecimalCode = 7;
    private const byte DateTimeCode = 8;
    private const byte DateTimeOffsetCode = 9;
    private const byte GuidCode = 10;
    private const byte ArrayFlag = 0x40;

    private static readonly Type[] Scalars =
    [
        typeof(string), typeof(bool), typeof(int), typeof(long), typeof(float), typeof(double), typeof(decimal),
        typeof(DateTime), typeof(DateTimeOffset), typeof(Guid),
    ];

    private static readonly Type[] Elements = [typeof(string), typeof(int), typeof(long), typeof(float), typeof(double), typeof(bool), typeof(Guid)];

    public static bool IsSupportedDataType(Type type)
    {
        Type plain = Nullable.GetUnderlyingType(type) ?? type;
        if (Array.IndexOf(Scalars, plain) >= 0)
        {
            return true;
        }

        Type? element = ElementType(type);
        return element is not null && Array.IndexOf(Elements, element) >= 0;
    }

    /// <summary>The element type of a supported collection type (<c>T[]</c> or <c>List&lt;T&gt;</c>), else null.</summary>
    public static Type? ElementType(Type type)
    {
        if (type.IsArray && type.GetArrayRank() == 1)
        {
            return type.GetElementType();
        }

        return type.IsGenericType && type.GetGenericTypeDefinition() == typeof(List<>) ? type.GetGenericArguments()[0] : null;
    }

    /// <summary>A data value as stored: collections copied to an array so a caller's later changes do not reach the store.</summary>
    public static object? ToStored(object? value, Type propertyType)
    {
        if (value is null || value is string)
        {
            return value;
        }

        Type? element = ElementType(propertyType);
        if (element is null)
        {
            return value;
        }

        var list = (IList)value;
        var copy = Array.CreateInstance(element, list.Count);
        list.CopyTo(copy, 0);
        return copy;
    }

    /// <summary>A stored data value as the property's type, copied so the caller cannot change the store.</summary>
    public static object? FromStored(object? stored, Type propertyType)
    {
        if (stored is not Array array)
        {
            return stored;
        }

        if (propertyType.IsArray)
        {
            return array.Clone();
        }

        var list = (IList)Activator.CreateInstance(propertyType, array.Length)!;
        foreach (object? item in array)
        {
            list.Add(item);
        }

        return list;
    }

    /// <summary>A vector property's value as a private float array, or null when the record has none.</summary>
    public static float[]? VectorToStored(object? value) => value switch
    {
        null => null,
        ReadOnlyMemory<float> memory => memory.ToArray(),
        float[] array => (float[])array.Clone(),
        Embedding<float> embedding => embedding.Vector.ToArray(),
        _ => throw new NotSupportedException($"A vector value of type {value.GetType()} is not supported; supported: {VectorKitModelBuilder.SupportedVectorTypes}."),
    };

    /// <summary>A stored vector as the property's type.</summary>
    public static object? VectorFromStored(float[]? stored, Type propertyType)
    {
        if (stored is null)
        {
            return null;
        }

        float[] copy = (float[])stored.Clone();
        if (propertyType == typeof(float[]))
        {
            return copy;
        }

        if (propertyType == typeof(Embedding<float>))
        {
            return new Embedding<float>(copy);
        }

        return new ReadOnlyMemory<float>(copy);
    }

    public static void Write(BinaryWriter writer, object? value)
    {
        switch (value)
        {
            case null: writer.Write(NullCode); break;
            case string s: writer.Write(StringCode); writer.Write(s); break;
            case bool b: writer.Write(BoolCode); writer.Write(b); break;
            case int i: writer.Write(IntCode); writer.Write(i); break;
            case long l: writer.Write(LongCode); writer.Write(l); break;
            case float f: writer.Write(FloatCode); writer.Write(f); break;
            case double d: writer.Write(DoubleCode); writer.Write(d); break;
            case decimal m: writer.Write(DecimalCode); writer.Write(m); break;
            case DateTime t: writer.Write(DateTimeCode); writer.Write(t.ToBinary()); break;
            case DateTimeOffset o:
                writer.Write(DateTimeOffsetCode);
                writer.Write(o.Ticks);
                writer.Write((short)o.Offset.TotalMinutes);
                break;
            case Guid g: writer.Write(GuidCode); writer.Write(g.ToByteArray()); break;
            case Array array:
                byte code = ScalarCode(array.GetType().GetElementType()!);
                writer.Write((byte)(ArrayFlag | code));
                writer.Write(array.Length);
                foreach (object? item in array)
                {
                    WriteScalarBody(writer, code, item!);
                }

                break;
            default:
                throw new NotSupportedException($"A value of type {value.GetType()} cannot be saved.");
        }
    }

    private static byte ScalarCode(Type type) =>
        type == typeof(string) ? StringCode
        : type == typeof(bool) ? BoolCode
        : type == typeof(int) ? IntCode
        : type == typeof(long) ? LongCode
        : type == typeof(float) ? FloatCode
        : type == typeof(double) ? DoubleCode
        : type == typeof(Guid) ? GuidCode
        : throw new NotSupportedException($"Arrays of {type} cannot be saved.");

    private static void WriteScalarBody(BinaryWriter writer, byte code, object item)
    {
        switch (code)
        {
            case StringCode: writer.Write((string)item); break;
            case BoolCode: writer.Write((bool)item); break;
            case IntCode: writer.Write((int)item); break;
            case LongCode: writer.Write((long)item); break;
            case FloatCode: writer.Write((float)item); break;
            case DoubleCode: writer.Write((double)item); break;
            default: writer.Write(((Guid)item).ToByteArray()); break;
        }
    }

    /// <summary>Reads one value written by <see cref="Write"/>, every length checked against the bytes left first.</summary>
    public static object? Read(ref FileCursor cursor)
    {
        byte code = cursor.Byte();
        if ((code & ArrayFlag) != 0)
        {
            byte element = (byte)(code & ~ArrayFlag);
            int count = cursor.Count(element == StringCode ? 1 : ElementBytes(element));
            Array array = Array.CreateInstance(ElementClrType(element), count);
            for (int i = 0; i < count; i++)
            {
                array.SetValue(ReadScalar(ref cursor, element), i);
            }

            return array;
        }

        return code == NullCode ? null : ReadScalar(ref cursor, code);
    }

    private static int ElementBytes(byte code) => code switch
    {
        BoolCode => 1,
        IntCode or FloatCode => 4,
        LongCode or DoubleCode => 8,
        GuidCode => 16,
        _ => throw FormatError(code),
    };

    private static Type ElementClrType(byte code) => code switch
    {
        StringCode => typeof(string),
        BoolCode => typeof(bool),
        IntCode => typeof(int),
        LongCode => typeof(long),
        FloatCode => typeof(float),
        DoubleCode => typeof(double),
        GuidCode => typeof(Guid),
        _ => throw FormatError(code),
    };

    private static CollectionFileException FormatError(byte code) => new($"unknown value type code {code}");

    private static object ReadScalar(ref FileCursor cursor, byte code) => code switch
    {
        StringCode => cursor.String(),
        BoolCode => cursor.Byte() switch { 0 => false, 1 => true, var b => throw new CollectionFileException($"invalid bool byte {b}") },
        IntCode => BinaryPrimitives.ReadInt32LittleEndian(cursor.Bytes(4)),
        LongCode => BinaryPrimitives.ReadInt64LittleEndian(cursor.Bytes(8)),
        FloatCode => BinaryPrimitives.ReadSingleLittleEndian(cursor.Bytes(4)),
        DoubleCode => BinaryPrimitives.ReadDoubleLittleEndian(cursor.Bytes(8)),
        DecimalCode => ReadDecimal(cursor.Bytes(16)),
        DateTimeCode => DateTime.FromBinary(BinaryPrimitives.ReadInt64LittleEndian(cursor.Bytes(8))),
        DateTimeOffsetCode => ReadOffset(ref cursor),
        GuidCode => new Guid(cursor.Bytes(16)),
        _ => throw FormatError(code),
    };

    private static decimal ReadDecimal(ReadOnlySpan<byte> bytes)
    {
        int[] bits = new int[4];
        for (int i = 0; i < 4; i++)
        {
            bits[i] = BinaryPrimitives.ReadInt32LittleEndian(bytes.Slice(i * 4, 4));
        }

        try
        {
            return new decimal(bits);
        }
        catch (ArgumentException e)
        {
            throw new CollectionFileException("invalid decimal value", e);
        }
    }

    private static DateTimeOffset ReadOffset(ref FileCursor cursor)
    {
        long ticks = BinaryPrimitives.ReadInt64LittleEndian(cursor.Bytes(8));
        short minutes = BinaryPrimitives.ReadInt16LittleEndian(cursor.Bytes(2));
        try
        {
            return new DateTimeOffset(ticks, TimeSpan.FromMinutes(minutes));
        }
        catch (ArgumentException e)
        {
            throw new CollectionFileException("invalid date and offset", e);
        }
    }

    /// <summary>UTF-8 bytes of a string as <see cref="BinaryWriter"/> writes it (7-bit encoded length first).</summary>
    public static string DecodeUtf8(ReadOnlySpan<byte> bytes)
    {
        try
        {
            return new UTF8Encoding(false, true).GetString(bytes);
        }
        catch (DecoderFallbackException e)
        {
            throw new CollectionFileException("a string is not valid UTF-8", e);
        }
    }
}
