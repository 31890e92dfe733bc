using Microsoft.Data.Sqlite;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>Direct SQL on an atlas file, bypassing the store: to damage it on purpose or to watch a running sweep.</summary>
internal static class RawSqlite
{
    public static long Scalar(string path, string sql, bool readOnly = false)
    {
        using var connection = Connect(path, readOnly);
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        return Convert.ToInt64(command.ExecuteScalar(), System.Globalization.CultureInfo.InvariantCulture);
    }

    public static string Text(string path, string sql)
    {
        using var connection = Connect(path, readOnly: true);
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        return (string)command.ExecuteScalar()!;
    }

    public static void Execute(string path, string sql, params (string Name, object Value)[] parameters)
    {
        using var connection = Connect(path, readOnly: false);
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        foreach (var (name, value) in parameters)
        {
            command.Parameters.AddWithValue(name, value);
        }

        command.ExecuteNonQuery();
    }

    public static byte[] Blob(string path, string sql, params (string Name, object Value)[] parameters)
    {
        using var connection = Connect(path, readOnly: true);
        using var command = connection.CreateCommand();
        command.CommandText = sql;
        foreach (var (name, value) in parameters)
        {
            command.Parameters.AddWithValue(name, value);
        }

        return (byte[])command.ExecuteScalar()!;
    }

    private static SqliteConnection Connect(string path, bool readOnly)
    {
        var builder = new SqliteConnectionStringBuilder
        {
            DataSource = path,
            Pooling = false,
            Mode = readOnly ? SqliteOpenMode.ReadOnly : SqliteOpenMode.ReadWriteCreate,
            DefaultTimeout = 30,
        };
        var connection = new SqliteConnection(builder.ToString());
        connection.Open();
        return connection;
    }
}
