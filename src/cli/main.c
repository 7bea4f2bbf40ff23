/* placeholder replaced by the CLI */
int main(void);
int main(void)
{
    return 0;
}
