using Strayspot.Service.Cli;

namespace Strayspot.Service;

public static class Program
{
    public static int Main(string[] args) => CliApp.Run(args);
}
