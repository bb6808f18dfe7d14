using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

public sealed class SafePathTests : IDisposable
{
    private readonly string _base = Path.Combine(Path.GetTempPath(), "strayspot-safepath-" + Guid.NewGuid().ToString("N"));
    private readonly string _root;
    private readonly string _outside;

    public SafePathTests()
    {
        _root = Path.Combine(_base, "data");
        _outside = Path.Combine(_base, "secret");
        Directory.CreateDirectory(Path.Combine(_root, "batches", "night"));
        Directory.CreateDirectory(_outside);
        File.WriteAllText(Path.Combine(_outside, "keys.txt"), "x");
        File.WriteAllText(Path.Combine(_root, "batches", "night", "f1.png"), "x");
    }

    public void Dispose() => Directory.Delete(_base, recursive: true);

    [Theory]
    [InlineData("batches/night/f1.png")]
    [InlineData("batches\\night\\f1.png")]
    [InlineData("batches//night/f1.png")]
    [InlineData("batches/night/not-yet-there.png")]
    public void Paths_inside_the_root_resolve_below_it(string relative)
    {
        string resolved = SafePath.Resolve(_root, relative);
        Assert.StartsWith(_root + Path.DirectorySeparatorChar, resolved);
        Assert.EndsWith(Path.GetFileName(relative.Replace('\\', '/')), resolved);
    }

    [Theory]
    [InlineData("../secret/keys.txt")]
    [InlineData("batches/../../secret/keys.txt")]
    [InlineData("batches/./night/f1.png")]
    [InlineData("..")]
    [InlineData("..\\secret\\keys.txt")]
    public void Relative_steps_are_refused(string relative) =>
        Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, relative));

    [Theory]
    [InlineData("/etc/passwd")]
    [InlineData("\\etc\\passwd")]
    [InlineData("C:\\Windows\\win.ini")]
    [InlineData("")]
    [InlineData("   ")]
    public void Absolute_and_empty_paths_are_refused(string relative) =>
        Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, relative));

    [Fact]
    public void A_directory_link_pointing_outside_is_refused()
    {
        Directory.CreateSymbolicLink(Path.Combine(_root, "escape"), _outside);
        var e = Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, "escape/keys.txt"));
        Assert.Contains("link", e.Message);
    }

    [Fact]
    public void A_file_link_pointing_outside_is_refused_even_as_a_relative_link()
    {
        File.CreateSymbolicLink(Path.Combine(_root, "batches", "innocent.png"), "../../secret/keys.txt");
        Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, "batches/innocent.png"));
    }

    [Fact]
    public void A_chain_of_links_ending_outside_is_refused()
    {
        Directory.CreateSymbolicLink(Path.Combine(_base, "hop"), _outside);               // outside → outside
        Directory.CreateSymbolicLink(Path.Combine(_root, "first"), Path.Combine(_base, "hop"));
        Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, "first/keys.txt"));
    }

    [Fact]
    public void A_link_staying_inside_the_root_is_followed()
    {
        Directory.CreateSymbolicLink(Path.Combine(_root, "latest"), Path.Combine(_root, "batches", "night"));
        Assert.Equal(Path.Combine(_root, "batches", "night", "f1.png"), SafePath.Resolve(_root, "latest/f1.png"));
    }

    [Fact]
    public void A_dangling_link_pointing_outside_is_refused()
    {
        File.CreateSymbolicLink(Path.Combine(_root, "later.png"), Path.Combine(_outside, "does-not-exist.png"));
        Assert.Throws<UnsafePathException>(() => SafePath.Resolve(_root, "later.png"));
    }

    [Fact]
    public void A_root_reached_through_a_link_still_works()
    {
        string alias = Path.Combine(_base, "alias");
        Directory.CreateSymbolicLink(alias, _root);
        string resolved = SafePath.Resolve(alias, "batches/night/f1.png");
        Assert.Equal(Path.Combine(_root, "batches", "night", "f1.png"), resolved);
    }
}
