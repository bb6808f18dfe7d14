namespace Strayspot.Service;

public static class Program
{
    public static int Main(string[] args) => 0;
}
